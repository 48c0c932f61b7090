package dev.stepwarden.stats;

import java.util.ArrayList;
import java.util.List;
import java.util.Locale;

/**
 * The maths of the learning-rate range test (Smith 2017, Cyclical Learning Rates for Training
 * Neural Networks, s3.3): train briefly while the rate rises step by step, then read the usable
 * range off the loss curve: it starts where the loss starts to fall and ends where the loss turns
 * ragged or rises. We raise the rate geometrically (Smith raises it linearly over a narrower
 * span; with a span of several decades a geometric ramp gives each decade the same number of
 * steps) and smooth the per-rate mean loss with the bias-corrected moving average of
 * {@link Ema}, since single mini-batch losses are too noisy to read a minimum from.
 */
public final class RangeTest {
  /** A fall of the smoothed loss by this fraction below its start counts as "starts to fall". */
  public static final double FALL = 0.01;
  /** Smoothing factor of the moving average over rate levels. */
  public static final double SMOOTHING = 0.5;
  /** The loss has run away once the smoothed loss exceeds this multiple of its lowest value. */
  public static final double RUNAWAY = 4.0;

  private RangeTest() {}

  /**
   * What the test read off the curve.
   *
   * @param found false when the loss never fell: there is no usable range and no pick
   * @param lower the rate where the smoothed loss first fell {@value #FALL} below its start
   * @param upper the rate of the lowest smoothed loss (after it the loss rises or turns ragged)
   * @param pick the rate to start the run with: {@code pickFraction x upper}, not below lower
   * @param note a sentence for the audit log
   */
  public record Reading(boolean found, double lower, double upper, double pick, String note) {}

  /** {@code steps} rates from {@code from} to {@code to}, both included, spaced geometrically. */
  public static double[] ramp(double from, double to, int steps) {
    if (!(from > 0) || !(to > from) || steps < 2) {
      throw new IllegalArgumentException("a ramp needs 0 < from < to and at least 2 steps, got "
          + from + ", " + to + ", " + steps);
    }
    double[] r = new double[steps];
    double ratio = Math.log(to / from) / (steps - 1);
    for (int i = 0; i < steps; i++) {
      r[i] = from * Math.exp(ratio * i);
    }
    r[steps - 1] = to;
    return r;
  }

  /**
   * Reads the range from the mean training loss observed at each rate, in the order the rates
   * were tried (ascending). Non-finite losses end the curve: the rates from there on are past the
   * range.
   */
  public static Reading read(double[] rates, double[] losses, double pickFraction) {
    if (rates.length != losses.length || rates.length == 0) {
      throw new IllegalArgumentException("rates and losses must be non-empty and of one length");
    }
    Ema ema = new Ema(SMOOTHING);
    List<Double> smooth = new ArrayList<>();
    double lowest = Double.POSITIVE_INFINITY;
    for (double loss : losses) {
      if (!Double.isFinite(loss)) {
        break;
      }
      double s = ema.offer(loss);
      if (s > RUNAWAY * lowest) {
        break;
      }
      lowest = Math.min(lowest, s);
      smooth.add(s);
    }
    if (smooth.size() < 2) {
      return new Reading(false, Double.NaN, Double.NaN, Double.NaN, "the loss ran away at the"
          + " first rates tried; lower probe.from");
    }
    double start = smooth.get(0);
    int lo = -1;
    int min = 0;
    for (int i = 0; i < smooth.size(); i++) {
      if (lo < 0 && smooth.get(i) <= (1 - FALL) * start) {
        lo = i;
      }
      if (smooth.get(i) < smooth.get(min)) {
        min = i;
      }
    }
    if (lo < 0) {
      return new Reading(false, Double.NaN, Double.NaN, Double.NaN, String.format(Locale.ROOT,
          "the smoothed loss never fell by %.0f %% between rates %.3g and %.3g; keeping the"
              + " configured rate", FALL * 100, rates[0], rates[smooth.size() - 1]));
    }
    double lower = rates[lo];
    double upper = rates[min];
    double pick = Math.max(lower, pickFraction * upper);
    boolean open = min == rates.length - 1;
    String note = String.format(Locale.ROOT, "the loss starts to fall at %.3g and is lowest at"
        + " %.3g%s; starting at %.3g", lower, upper, open
        ? " (still falling at the last rate tried: the range may reach further)"
        : smooth.size() < rates.length ? " (it ran away at " + String.format(Locale.ROOT,
            "%.3g)", rates[smooth.size()]) : " (it rises after)", pick);
    return new Reading(true, lower, upper, pick, note);
  }
}
