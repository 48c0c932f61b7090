package dev.stepwarden.detectors;

import dev.stepwarden.stats.Autocorrelation;
import dev.stepwarden.stats.SensSlope;
import java.util.LinkedHashMap;
import java.util.Map;
import java.util.Optional;

/**
 * Sloshing: the series goes up and down without getting anywhere, the mark of a learning rate
 * too large for the valley it is in.
 *
 * <p>Over the last w = {@code window} points x_1..x_w, with differences d_i = x_{i+1} - x_i
 * (i = 1..w-1), it fires when both hold:
 *
 * <ul>
 *   <li>r = lag-1 autocorrelation of d_1..d_{w-1} (see {@link Autocorrelation}) &lt;= {@code
 *       maxAutocorr}: each step up tends to be followed by a step down;
 *   <li>q = |b| (w - 1) / |mean(x)| &lt;= {@code maxRelSlope}, with b the Sen slope per point: the
 *       net change the trend makes across the window is a small fraction of the level.
 * </ul>
 *
 * <p>Choosing maxAutocorr: differencing independent noise already gives r near -0.5 (d_i and
 * d_{i+1} share one noise term with opposite signs), so a threshold near -0.5 fires on any
 * noisy plateau. A bounce of amplitude A on noise of standard deviation sigma, x_i = level +
 * A(-1)^i + e_i, gives r = -(4A^2 + sigma^2) / (4A^2 + 2 sigma^2): -0.75 is reached at A =
 * sigma / sqrt(2) and -1 only as A/sigma grows. Differences make r immune to a linear trend and
 * damp the curvature of a decaying loss. Non-finite values are skipped.
 *
 * <p>Proposed defaults window = 40, maxAutocorr = -0.75, maxRelSlope = 0.02: 0.1 to 0.33 spurious
 * firings per 1000 points on flat or descending noisy series; a bounce of twice the noise is
 * found after a median of 9 to 20 points (measured by DetectorTrials).
 *
 * <p>Figures: {@code window}, {@code diff_autocorr}, {@code limit_autocorr}, {@code sen_slope},
 * {@code mean}, {@code relative_net_change}, {@code limit_relative_net_change}, {@code
 * first_step}, {@code last_step}.
 */
final class OscillationDetector implements Detector {
  static final int DEFAULT_WINDOW = 40;
  static final double DEFAULT_MAX_AUTOCORR = -0.75;
  static final double DEFAULT_MAX_REL_SLOPE = 0.02;

  private final String series;
  private final double maxAutocorr;
  private final double maxRelSlope;
  private final double swingAbove;
  private final StartLevel startLevel = new StartLevel();
  private final SampleWindow window;
  private final double[] values;
  private final double[] diffs;
  private final double[] pairScratch;

  OscillationDetector(int window, double maxAutocorr, double maxRelSlope) {
    this("series", window, maxAutocorr, maxRelSlope, 0);
  }

  /**
   * @param window points judged (ranges: {@link DetectorKind#WOBBLES})
   * @param maxAutocorr upper limit on the lag-1 autocorrelation of the differences
   * @param maxRelSlope upper limit on the relative net change across the window
   * @param swingAbove the least mean absolute change between successive points that counts, as
   *     a fraction of the level the generation started at (0: any swing)
   */
  OscillationDetector(String series, int window, double maxAutocorr, double maxRelSlope,
      double swingAbove) {
    this.series = Figures.series(series);
    DetectorKind k = DetectorKind.WOBBLES;
    k.param("over").requireInt(window);
    k.param("autocorr_below").require(maxAutocorr);
    k.param("net_change_below").require(maxRelSlope);
    this.swingAbove = k.param("swing_above").require(swingAbove);
    this.maxAutocorr = maxAutocorr;
    this.maxRelSlope = maxRelSlope;
    this.window = new SampleWindow(window);
    this.values = new double[window];
    this.diffs = new double[window - 1];
    this.pairScratch = new double[SensSlope.pairs(window)];
  }

  @Override
  public Optional<Evidence> offer(long step, double value) {
    if (!Double.isFinite(value)) {
      return Optional.empty();
    }
    startLevel.offer(value);
    window.add(step, value);
    if (!window.isFull()) {
      return Optional.empty();
    }
    int n = window.copyValues(values);
    double mean = 0;
    double swing = 0;
    for (int i = 0; i < n; i++) {
      mean += values[i];
      if (i > 0) {
        diffs[i - 1] = values[i] - values[i - 1];
        swing += Math.abs(diffs[i - 1]);
      }
    }
    mean /= n;
    swing /= n - 1;
    double start = startLevel.level();
    if (swingAbove > 0 && !(swing >= swingAbove * start)) {
      return Optional.empty(); // the swings are small against where the generation started
    }
    double r = Autocorrelation.lag1(diffs, 0, n - 1);
    if (!(r <= maxAutocorr)) {
      return Optional.empty();
    }
    double slope = SensSlope.slope(values, n, pairScratch);
    double relative = Math.abs(slope) * (n - 1) / Math.abs(mean);
    if (!(relative <= maxRelSlope)) {
      return Optional.empty();
    }
    Map<String, Object> figures = new LinkedHashMap<>();
    figures.put("window", n);
    figures.put("diff_autocorr", r);
    figures.put("limit_autocorr", maxAutocorr);
    figures.put("sen_slope", slope);
    figures.put("mean", mean);
    figures.put("relative_net_change", relative);
    figures.put("limit_relative_net_change", maxRelSlope);
    figures.put("mean_swing", swing);
    figures.put("start_level", start);
    figures.put("first_step", window.step(0));
    figures.put("last_step", window.step(n - 1));
    String summary =
        series
            + " goes up and down without net progress over the last "
            + n
            + " points (steps "
            + window.step(0)
            + " to "
            + window.step(n - 1)
            + "): successive changes alternate (lag-1 autocorrelation "
            + Figures.num(r)
            + " <= "
            + Figures.num(maxAutocorr)
            + ") and the trend moves it by "
            + Figures.percent(relative)
            + " of its level "
            + Figures.num(mean)
            + " (limit "
            + Figures.percent(maxRelSlope)
            + "); the mean swing "
            + Figures.num(swing)
            + (Double.isNaN(start) ? "" : " is " + Figures.percent(swing / start)
                + " of the start level " + Figures.num(start))
            + ".";
    return Optional.of(new Evidence(DetectorKind.WOBBLES.key(), summary, figures));
  }

  @Override
  public void reset() {
    window.clear();
    startLevel.reset();
  }

  @Override
  public void rewindTo(long step) {
    window.clear();
  }

  @Override
  public void rateChanged() {
    window.clear();
  }
}
