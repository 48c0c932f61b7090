package dev.stepwarden.detectors;

import dev.stepwarden.stats.MannKendall;
import dev.stepwarden.stats.SensSlope;
import java.util.LinkedHashMap;
import java.util.Map;
import java.util.Optional;

/**
 * A steady rise: the last {@code window} points show an upward Mann-Kendall trend with one-sided
 * p &lt; {@code alpha}, i.e. P(S &gt;= s) under "no trend" is below alpha (see {@link
 * MannKendall}; exact for windows of at most 10 points without ties).
 *
 * <p>Catches slow divergence that never trips the ratio rule of {@link SpikeDetector}. The test
 * is rank based, so the size of the rise does not matter, only its consistency. It assumes
 * independent noise: a trainer that logs an already smoothed loss has autocorrelated noise and
 * needs a smaller alpha. Non-finite values are skipped. The window is judged on every point once
 * it is full.
 *
 * <p>Proposed defaults window = 30, alpha = 1e-4: 0.02 to 0.05 spurious firings per 1000 points
 * on flat or descending series with independent noise (measured by DetectorTrials).
 *
 * <p>Figures: {@code window}, {@code s_statistic}, {@code z}, {@code p_value}, {@code exact},
 * {@code sen_slope} (per point), {@code first_step}, {@code last_step}, {@code first},
 * {@code last}.
 */
final class GrowthDetector implements Detector {
  static final int DEFAULT_WINDOW = 30;
  static final double DEFAULT_ALPHA = 1e-4;

  private final String series;
  private final double alpha;
  private final double riseAbove;
  private final StartLevel startLevel = new StartLevel();
  private final SampleWindow window;
  private final double[] values;
  private final double[] scratch;
  private final double[] pairScratch;

  GrowthDetector(int window, double alpha) {
    this("series", window, alpha, 0);
  }

  /**
   * @param window number of points judged (range: {@link DetectorKind#CLIMBS})
   * @param alpha one-sided significance level
   * @param riseAbove the least net rise over the window that counts, as a fraction of the level
   *     the generation started at (0: any significant rise)
   */
  GrowthDetector(String series, int window, double alpha, double riseAbove) {
    this.series = Figures.series(series);
    DetectorKind k = DetectorKind.CLIMBS;
    k.param("over").requireInt(window);
    this.alpha = k.param("p_below").require(alpha);
    this.riseAbove = k.param("rise_above").require(riseAbove);
    this.window = new SampleWindow(window);
    this.values = new double[window];
    this.scratch = new double[window];
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
    MannKendall.Result mk = MannKendall.test(values, n, scratch);
    if (!(mk.pUpward() < alpha)) {
      return Optional.empty();
    }
    double slope = SensSlope.slope(values, n, pairScratch);
    double start = startLevel.level();
    double rise = slope * (n - 1);
    if (riseAbove > 0 && !(rise >= riseAbove * start)) {
      return Optional.empty(); // significant but small against where the generation started
    }
    Map<String, Object> figures = new LinkedHashMap<>();
    figures.put("window", n);
    figures.put("s_statistic", mk.s());
    figures.put("z", mk.z());
    figures.put("p_value", mk.pUpward());
    figures.put("exact", mk.exact());
    figures.put("sen_slope", slope);
    figures.put("first_step", window.step(0));
    figures.put("last_step", window.step(n - 1));
    figures.put("first", values[0]);
    figures.put("last", values[n - 1]);
    figures.put("net_rise", rise);
    figures.put("start_level", start);
    String summary =
        series
            + " has risen steadily over the last "
            + n
            + " points (steps "
            + window.step(0)
            + " to "
            + window.step(n - 1)
            + ", "
            + Figures.num(values[0])
            + " to "
            + Figures.num(values[n - 1])
            + "): Mann-Kendall S = "
            + mk.s()
            + ", one-sided p "
            + Figures.p(mk.pUpward())
            + " below "
            + Figures.num(alpha)
            + ", Sen slope "
            + Figures.num(slope)
            + " per point, a rise of "
            + Figures.num(rise)
            + (Double.isNaN(start) ? "" : " against a start level of " + Figures.num(start))
            + ".";
    return Optional.of(new Evidence(DetectorKind.CLIMBS.key(), summary, figures));
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
