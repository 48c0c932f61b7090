package dev.stepwarden.queue;

import dev.stepwarden.metrics.Sample;
import dev.stepwarden.supervise.RunDirectory;
import dev.stepwarden.supervise.RunObserver;
import java.io.IOException;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.ArrayList;
import java.util.LinkedHashMap;
import java.util.List;
import java.util.Map;
import java.util.Optional;
import java.util.function.Consumer;
import tools.jackson.databind.JsonNode;
import tools.jackson.databind.json.JsonMapper;

/**
 * The median stopping rule across the runs of one cohort (Golovin et al. 2017, "Google Vizier",
 * section 3.2): a pending run is stopped at step s when its best value by step s is strictly worse
 * than the median of the running averages, up to step s, of the completed runs' values. Lower is
 * better (losses). The completed runs are read once, when the pending run starts, from the
 * normalized metrics files of their run directories.
 */
public final class MedianStopping {
  private static final JsonMapper JSON = JsonMapper.builder().build();

  /** One completed run's values of the watched series, in step order. */
  record Curve(String run, long[] steps, double[] values) {
    /** The mean of the values at steps up to {@code s}, or NaN when it had none by then. */
    double runningAverage(long s) {
      double sum = 0;
      int n = 0;
      for (int i = 0; i < steps.length && steps[i] <= s; i++) {
        if (Double.isFinite(values[i])) {
          sum += values[i];
          n++;
        }
      }
      return n == 0 ? Double.NaN : sum / n;
    }
  }

  /** Why a run is stopped: the numbers the audit record carries. */
  public record Verdict(long step, double best, double median, int completedRuns,
      Map<String, Double> averages) {
    public String summary() {
      return "median stopping rule: best " + best + " by step " + step + " is worse than the"
          + " median " + median + " of the running averages of " + completedRuns
          + " completed runs of the cohort";
    }
  }

  private MedianStopping() {}

  static Curve read(String run, Path runDir, String series) throws IOException {
    Path file = runDir.resolve(RunDirectory.METRICS);
    List<Long> steps = new ArrayList<>();
    List<Double> values = new ArrayList<>();
    if (Files.exists(file)) {
      for (String line : Files.readAllLines(file)) {
        if (line.isBlank()) {
          continue;
        }
        JsonNode n = JSON.readTree(line);
        JsonNode v = n.get(series);
        if (v != null && v.isNumber() && n.has("step")) {
          steps.add(n.get("step").asLong());
          values.add(v.asDouble());
        }
      }
    }
    // a rewound run reports some steps twice: keep file order, which is time order, but sort
    // by step so "values up to step s" is a prefix
    Integer[] idx = new Integer[steps.size()];
    for (int i = 0; i < idx.length; i++) {
      idx[i] = i;
    }
    java.util.Arrays.sort(idx, (a, b) -> Long.compare(steps.get(a), steps.get(b)));
    long[] s = new long[idx.length];
    double[] v = new double[idx.length];
    for (int i = 0; i < idx.length; i++) {
      s[i] = steps.get(idx[i]);
      v[i] = values.get(idx[i]);
    }
    return new Curve(run, s, v);
  }

  /**
   * The rule itself.
   *
   * @param best the pending run's best (lowest) value by {@code step}
   * @param minCompleted the rule stays silent with fewer completed runs reporting by step s
   */
  static Optional<Verdict> judge(long step, double best, List<Curve> completed,
      int minCompleted) {
    Map<String, Double> averages = new LinkedHashMap<>();
    for (Curve c : completed) {
      double a = c.runningAverage(step);
      if (!Double.isNaN(a)) {
        averages.put(c.run(), a);
      }
    }
    if (averages.size() < Math.max(1, minCompleted) || Double.isNaN(best)) {
      return Optional.empty();
    }
    double median = median(averages.values().stream().mapToDouble(Double::doubleValue)
        .sorted().toArray());
    return best > median
        ? Optional.of(new Verdict(step, best, median, averages.size(), averages))
        : Optional.empty();
  }

  static double median(double[] sorted) {
    int n = sorted.length;
    return n % 2 == 1 ? sorted[n / 2] : (sorted[n / 2 - 1] + sorted[n / 2]) / 2;
  }

  /**
   * Watches a pending run's series and calls {@code stop} once when the rule says so. Runs on the
   * supervisor's pump thread: {@code stop} must hand the work to another thread.
   */
  static RunObserver observer(String series, List<Curve> completed, int minCompleted,
      long minStep, Consumer<Verdict> stop) {
    return new RunObserver() {
      private double best = Double.NaN;
      private boolean fired;

      @Override
      public void onSample(Sample sample, double rate) {
        Double v = sample.value(series);
        if (v == null || fired) {
          return;
        }
        if (Double.isFinite(v) && (Double.isNaN(best) || v < best)) {
          best = v;
        }
        if (sample.step() < minStep) {
          return;
        }
        Optional<Verdict> verdict = judge(sample.step(), best, completed, minCompleted);
        if (verdict.isPresent()) {
          fired = true;
          stop.accept(verdict.get());
        }
      }
    };
  }
}
