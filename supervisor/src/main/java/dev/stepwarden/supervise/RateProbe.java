package dev.stepwarden.supervise;

import dev.stepwarden.metrics.MetricsIntake;
import dev.stepwarden.metrics.MetricsSources;
import dev.stepwarden.metrics.ReadPlan;
import dev.stepwarden.metrics.Sample;
import dev.stepwarden.rules.GuardFile;
import dev.stepwarden.stats.RangeTest;
import java.util.ArrayList;
import java.util.List;

/**
 * The supervisor's side of the rate probe: follows the training loss of a first, throw-away
 * launch while the rate is ramped through the control file, and says when to publish the next
 * rate and when the test is over. The trainer does not wait for us, so each loss is booked at the
 * rate the trainer reports having used (or, if it reports none, the rate last published), and a
 * rate is held until {@code hold} samples were seen at it. Reads every source of the read plan:
 * stdout, stderr and followed files. Used under the supervisor's lock.
 */
final class RateProbe {
  private final int hold;
  private final double pick;
  private final MetricsSources sources;
  private final double[] ramp;
  private final double[] sum;
  private final int[] count;
  private int level;
  private long steps;
  private double lowestMean = Double.POSITIVE_INFINITY;
  private boolean done;
  /** The losses booked at the last level, in order (a branch's whole series). */
  private final List<Double> lastLevel = new ArrayList<>();

  RateProbe(GuardFile.Probe probe, ReadPlan plan) {
    this(RangeTest.ramp(probe.from(), probe.to(), probe.steps()), probe.hold(), probe.pick(),
        plan);
  }

  private RateProbe(double[] ramp, int hold, double pick, ReadPlan plan) {
    this.hold = hold;
    this.pick = pick;
    this.sources = new MetricsSources(plan);
    this.ramp = ramp;
    this.sum = new double[ramp.length];
    this.count = new int[ramp.length];
  }

  /**
   * One branch of the check of the probe's pick: a single rate held for {@code samples}
   * training samples; done then, or at the first non-finite loss.
   */
  static RateProbe branch(double rate, int samples, ReadPlan plan) {
    return new RateProbe(new double[] {rate}, samples, 1.0, plan);
  }

  /** The losses booked at the last rate of the ramp (for a branch: all of them). */
  double[] lastLevelLosses() {
    return lastLevel.stream().mapToDouble(Double::doubleValue).toArray();
  }

  double rate() {
    return ramp[level];
  }

  long steps() {
    return steps;
  }

  boolean done() {
    return done;
  }

  /** Marks the test over (the trainer exited early). */
  void finish() {
    done = true;
  }

  /** Takes one stdout or stderr line; returns the next rate to publish, or NaN. */
  double accept(boolean stderr, String line, long now) {
    double next = Double.NaN;
    for (int i : sources.sourcesOf(stderr ? ReadPlan.Source.STDERR : ReadPlan.Source.STDOUT)) {
      double n = acceptSource(i, line, now);
      if (!Double.isNaN(n)) {
        next = n;
      }
    }
    return next;
  }

  /**
   * Takes one line of the read plan's source {@code source} (the index {@link MetricsSources}
   * gives it, a followed file included); returns the next rate to publish, or NaN.
   */
  double acceptSource(int source, String line, long now) {
    if (done) {
      return Double.NaN;
    }
    MetricsIntake.Reading r = sources.accept(source, line, now, false);
    Sample s = r == null ? null : r.sample();
    Double loss = s == null ? null : s.value("train");
    if (loss == null) {
      return Double.NaN;
    }
    steps++;
    int at = levelOf(r.hasRate() ? r.reportedRate() : ramp[level]);
    if (at == ramp.length - 1) {
      lastLevel.add(loss);
    }
    if (!Double.isFinite(loss)) {
      done = true; // the rate at this level is past the usable range
      sum[at] = Double.NaN;
      count[at]++;
      return Double.NaN;
    }
    sum[at] += loss;
    count[at]++;
    if (at == level && count[at] >= hold) {
      double mean = sum[at] / count[at];
      lowestMean = Math.min(lowestMean, mean);
      if (mean > RangeTest.RUNAWAY * lowestMean || level == ramp.length - 1) {
        done = true;
        return Double.NaN;
      }
      level++;
      return ramp[level];
    }
    return Double.NaN;
  }

  /** The level whose rate is nearest (on a log scale) to the rate the trainer reported. */
  private int levelOf(double rate) {
    int best = level;
    double gap = Double.POSITIVE_INFINITY;
    for (int i = 0; i <= level; i++) {
      double g = Math.abs(Math.log(rate / ramp[i]));
      if (g < gap) {
        gap = g;
        best = i;
      }
    }
    return best;
  }

  /** The range read off the levels that got samples. */
  RangeTest.Reading reading() {
    List<Double> rates = new ArrayList<>();
    List<Double> losses = new ArrayList<>();
    for (int i = 0; i < ramp.length; i++) {
      if (count[i] > 0) {
        rates.add(ramp[i]);
        losses.add(sum[i] / count[i]);
      }
    }
    if (rates.isEmpty()) {
      return new RangeTest.Reading(false, Double.NaN, Double.NaN, Double.NaN,
          "the trainer reported no training loss during the probe");
    }
    return RangeTest.read(rates.stream().mapToDouble(Double::doubleValue).toArray(),
        losses.stream().mapToDouble(Double::doubleValue).toArray(), pick);
  }

  /** Rates and mean losses per level, for the audit record. */
  List<List<Double>> levels() {
    List<List<Double>> out = new ArrayList<>();
    for (int i = 0; i < ramp.length; i++) {
      if (count[i] > 0) {
        out.add(List.of(ramp[i], sum[i] / count[i]));
      }
    }
    return out;
  }

  void close() {
    sources.close();
  }
}
