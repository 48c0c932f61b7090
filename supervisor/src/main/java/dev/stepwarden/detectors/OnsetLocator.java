package dev.stepwarden.detectors;

import dev.stepwarden.stats.Cusum;
import java.util.Arrays;
import java.util.LinkedHashMap;
import java.util.Map;
import java.util.Optional;

/**
 * Where did the rise begin? Keeps the last {@code window} (step, value) points of the training
 * series and, when asked, runs a one-sided CUSUM backwards from the newest point (see {@link
 * Cusum#backwardOnset}) to estimate the step at which the current rise started, so that a rewind
 * can choose a checkpoint written before it.
 *
 * <p>Procedure, with allowance k and threshold h in units of the noise sigma:
 *
 * <ol>
 *   <li>baseline mu = median of the window; sigma = 1.4826 MAD(d) / sqrt(2) over the first
 *       differences d (robust to the rise itself, and to a slow trend, which shifts d only by a
 *       constant);
 *   <li>backward run with reference mu + k sigma and threshold h sigma gives a first onset j0;
 *   <li>the window median is pulled up by a descending trend, so the run is repeated with mu and
 *       sigma taken from the points just before j0 (max(8, n/4) of them): the level the rise
 *       actually left. The refined onset is kept when it exists.
 * </ol>
 *
 * A non-finite value counts as a point (k + h) sigma above the baseline: one alone is not enough
 * evidence of a rise, several are. The result names the onset step and the last step before it
 * ({@code lastGoodStep}); when the rise started at the first point of the window the true onset
 * may be older and {@code beforeWindow} is true.
 */
public final class OnsetLocator {
  public static final int DEFAULT_WINDOW = 256;
  public static final double DEFAULT_ALLOWANCE = 0.5;
  public static final double DEFAULT_THRESHOLD = 5.0;

  private static final double MAD_TO_SIGMA = 1.4826;

  /**
   * An estimated onset.
   *
   * @param onsetStep step of the first point of the rise
   * @param lastGoodStep step of the point before it (equal to onsetStep when beforeWindow)
   * @param beforeWindow the rise already started at the window's first point
   * @param baseline the level the rise left
   * @param sigma the noise scale used
   * @param excessSigmas the rise's CUSUM excess, in sigmas
   */
  public record Onset(
      long onsetStep,
      long lastGoodStep,
      boolean beforeWindow,
      double baseline,
      double sigma,
      double excessSigmas) {
    public Map<String, Object> figures() {
      Map<String, Object> f = new LinkedHashMap<>();
      f.put("onset_step", onsetStep);
      f.put("last_good_step", lastGoodStep);
      f.put("before_window", beforeWindow);
      f.put("baseline", baseline);
      f.put("sigma", sigma);
      f.put("excess_sigmas", excessSigmas);
      return f;
    }
  }

  private final double allowance;
  private final double threshold;
  private final SampleWindow window;
  private final long[] steps;
  private final double[] values;

  /**
   * @param window points kept, 16..100000
   * @param allowance CUSUM allowance k in sigmas, &gt;= 0
   * @param threshold CUSUM threshold h in sigmas, &gt; 0
   */
  public OnsetLocator(int window, double allowance, double threshold) {
    if (window < 16 || window > 100_000) {
      throw new IllegalArgumentException("onset window must be in 16..100000, got " + window);
    }
    validate(allowance, threshold);
    this.allowance = allowance;
    this.threshold = threshold;
    this.window = new SampleWindow(window);
    this.steps = new long[window];
    this.values = new double[window];
  }

  public void add(long step, double value) {
    window.add(step, value);
  }

  /** The onset of the rise the window ends in, or empty when it does not end in a rise. */
  public Optional<Onset> locate() {
    int n = window.copyValues(values);
    window.copySteps(steps);
    return locate(steps, values, n, allowance, threshold);
  }

  public void reset() {
    window.clear();
  }

  /** Locates the onset in (steps[i], values[i]), i = 0..n-1, oldest first. */
  public static Optional<Onset> locate(
      long[] steps, double[] values, int n, double allowance, double threshold) {
    validate(allowance, threshold);
    if (n < 4 || n > values.length || n > steps.length) {
      return Optional.empty();
    }
    double[] level = levelAndSigma(values, 0, n);
    if (level == null) {
      return Optional.empty();
    }
    double[] y = new double[n];
    int onset = run(values, n, level, allowance, threshold, y);
    if (onset < 0) {
      return Optional.empty();
    }
    int before = Math.max(8, n / 4);
    if (onset >= 8) {
      double[] local = levelAndSigma(values, Math.max(0, onset - before), onset);
      if (local != null) {
        int refined = run(values, n, local, allowance, threshold, y);
        if (refined >= 0) {
          onset = refined;
          level = local;
        }
      }
    }
    run(values, n, level, allowance, threshold, y); // y for the level finally used
    double excess = 0;
    for (int i = onset; i < n; i++) {
      excess += y[i] - (level[0] + allowance * level[1]);
    }
    return Optional.of(
        new Onset(
            steps[onset],
            onset > 0 ? steps[onset - 1] : steps[0],
            onset == 0,
            level[0],
            level[1],
            excess / level[1]));
  }

  private static int run(
      double[] values, int n, double[] level, double allowance, double threshold, double[] y) {
    double mu = level[0];
    double sigma = level[1];
    for (int i = 0; i < n; i++) {
      y[i] = Double.isFinite(values[i]) ? values[i] : mu + (allowance + threshold) * sigma;
    }
    return Cusum.backwardOnset(y, n, mu + allowance * sigma, threshold * sigma);
  }

  /** {median, sigma} of the finite values in [from, to), or null when there are too few. */
  private static double[] levelAndSigma(double[] values, int from, int to) {
    double[] finite = new double[to - from];
    double[] diffs = new double[to - from];
    int m = 0;
    int d = 0;
    double previous = Double.NaN;
    for (int i = from; i < to; i++) {
      double v = values[i];
      if (!Double.isFinite(v)) {
        continue;
      }
      finite[m++] = v;
      if (!Double.isNaN(previous)) {
        diffs[d++] = v - previous;
      }
      previous = v;
    }
    if (m < 4) {
      return null;
    }
    double median = median(finite, m);
    double centre = median(diffs, d);
    for (int i = 0; i < d; i++) {
      diffs[i] = Math.abs(diffs[i] - centre);
    }
    double sigma = MAD_TO_SIGMA * median(diffs, d) / Math.sqrt(2);
    if (!(sigma > 0)) {
      sigma = Math.max(Math.abs(median) * 1e-6, 1e-12); // a flat series: any rise stands out
    }
    return new double[] {median, sigma};
  }

  private static double median(double[] a, int n) {
    Arrays.sort(a, 0, n);
    return n % 2 == 1 ? a[n / 2] : (a[n / 2 - 1] + a[n / 2]) / 2;
  }

  private static void validate(double allowance, double threshold) {
    if (!(allowance >= 0) || !Double.isFinite(allowance)) {
      throw new IllegalArgumentException(
          "onset allowance must be finite and >= 0 sigmas, got " + allowance);
    }
    if (!(threshold > 0) || !Double.isFinite(threshold)) {
      throw new IllegalArgumentException(
          "onset threshold must be finite and > 0 sigmas, got " + threshold);
    }
  }
}
