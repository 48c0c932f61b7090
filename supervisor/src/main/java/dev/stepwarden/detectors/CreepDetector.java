package dev.stepwarden.detectors;

import dev.stepwarden.stats.MannKendall;
import dev.stepwarden.stats.SensSlope;
import java.util.LinkedHashMap;
import java.util.Map;
import java.util.Optional;

/**
 * Steady but slow progress: over the last {@code over} evaluations the series falls
 * significantly, yet only by a small fraction of its level per evaluation. Lower is better; the
 * usual response is a larger learning rate.
 *
 * <p>Over x_1..x_over, with b the Sen slope per evaluation and L = |mean(x)|, it fires when
 *
 * <ul>
 *   <li>the one-sided Mann-Kendall test for a downward trend gives p &lt; {@code alpha}, and b &lt;
 *       0 (steady), and
 *   <li>|b| / L &lt; {@code maxRelSlopePerEval} (slow).
 * </ul>
 *
 * <p>With over &lt;= 10 and no ties the p-value is exact; the smallest possible is 1/over!, so
 * alpha must be above it for the detector to be able to fire at all. Non-finite values skipped.
 *
 * <p>Proposed defaults over = 8, alpha = 0.001, maxRelSlopePerEval = 0.2 %: about 0.75 spurious
 * firings per 1000 evaluations on flat noise, none on fast descents, and a 0.1 %-per-evaluation
 * creep under 0.05 % noise is found after 8 to 9 evaluations (measured by DetectorTrials).
 *
 * <p>Figures: {@code window}, {@code s_statistic}, {@code p_value} (downward), {@code sen_slope}
 * (per evaluation), {@code level}, {@code relative_slope}, {@code limit_relative_slope}, {@code
 * first_step}, {@code last_step}.
 */
final class CreepDetector implements Detector {
  static final String NAME = "creeps";

  static final int DEFAULT_OVER = 8;
  static final double DEFAULT_ALPHA = 0.001;
  static final double DEFAULT_MAX_REL_SLOPE_PER_EVAL = 0.002;

  private final String series;
  private final double alpha;
  private final double maxRelSlopePerEval;
  private final SampleWindow window;
  private final double[] values;
  private final double[] scratch;
  private final double[] pairScratch;

  CreepDetector(int over, double alpha, double maxRelSlopePerEval) {
    this("series", over, alpha, maxRelSlopePerEval);
  }

  /**
   * @param over evaluations judged, 3..200
   * @param alpha significance level of the downward trend test, in (0, 1)
   * @param maxRelSlopePerEval largest relative fall per evaluation still called slow, &gt; 0
   */
  CreepDetector(String series, int over, double alpha, double maxRelSlopePerEval) {
    this.series = Figures.series(series);
    if (over < 3 || over > 200) {
      throw new IllegalArgumentException("creep 'over' must be in 3..200, got " + over);
    }
    if (!(alpha > 0 && alpha < 1)) {
      throw new IllegalArgumentException("creep alpha must be in (0, 1), got " + alpha);
    }
    if (!(maxRelSlopePerEval > 0) || !Double.isFinite(maxRelSlopePerEval)) {
      throw new IllegalArgumentException(
          "creep maxRelSlopePerEval must be finite and > 0, got " + maxRelSlopePerEval);
    }
    this.alpha = alpha;
    this.maxRelSlopePerEval = maxRelSlopePerEval;
    this.window = new SampleWindow(over);
    this.values = new double[over];
    this.scratch = new double[over];
    this.pairScratch = new double[SensSlope.pairs(over)];
  }

  @Override
  public Optional<Evidence> offer(long step, double value) {
    if (!Double.isFinite(value)) {
      return Optional.empty();
    }
    window.add(step, value);
    if (!window.isFull()) {
      return Optional.empty();
    }
    int n = window.copyValues(values);
    MannKendall.Result mk = MannKendall.test(values, n, scratch);
    if (!(mk.pDownward() < alpha)) {
      return Optional.empty();
    }
    double slope = SensSlope.slope(values, n, pairScratch);
    double level = 0;
    for (int i = 0; i < n; i++) {
      level += values[i];
    }
    level = Math.abs(level / n);
    double relative = Math.abs(slope) / level;
    if (!(slope < 0 && relative < maxRelSlopePerEval)) {
      return Optional.empty();
    }
    Map<String, Object> figures = new LinkedHashMap<>();
    figures.put("window", n);
    figures.put("s_statistic", mk.s());
    figures.put("p_value", mk.pDownward());
    figures.put("sen_slope", slope);
    figures.put("level", level);
    figures.put("relative_slope", relative);
    figures.put("limit_relative_slope", maxRelSlopePerEval);
    figures.put("first_step", window.step(0));
    figures.put("last_step", window.step(n - 1));
    String summary =
        series
            + " falls steadily but slowly: "
            + Figures.percent(relative)
            + " of its level "
            + Figures.num(level)
            + " per evaluation over the last "
            + n
            + " evaluations (limit "
            + Figures.percent(maxRelSlopePerEval)
            + "), Mann-Kendall S = "
            + mk.s()
            + ", one-sided p "
            + Figures.p(mk.pDownward())
            + ".";
    return Optional.of(new Evidence(NAME, summary, figures));
  }

  @Override
  public void reset() {
    window.clear();
  }
}
