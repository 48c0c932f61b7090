package dev.stepwarden.detectors;

import dev.stepwarden.stats.MannKendall;
import java.util.LinkedHashMap;
import java.util.Map;
import java.util.Optional;

/**
 * A validation plateau: the last {@code over} evaluations have not improved on the best value seen
 * before them by the relative gain {@code minRelGain}, and they show no significant downward
 * trend either. Lower is better.
 *
 * <p>Let B be the best (lowest) value of all evaluations before the window and m the best of the
 * last {@code over} evaluations x_1..x_over. The relative gain is g = (B - m) / |B| (any
 * improvement over B = 0 counts as infinite). It fires when
 *
 * <ul>
 *   <li>g &lt; minRelGain, and
 *   <li>the one-sided Mann-Kendall test of x_1..x_over for a downward trend gives p &gt;= alpha
 *       (a series still falling steadily, only slowly, is creeping, not flat: see {@link
 *       CreepDetector}).
 * </ul>
 *
 * <p>It needs at least over + 1 evaluations since the last reset. One bad evaluation cannot fire
 * it: the window's best m ignores a single rise, so the other over - 1 evaluations must also have
 * failed to improve. Only the scalar B and the window are kept. Non-finite values are skipped.
 *
 * <p>Proposed defaults over = 5, minRelGain = 0.5 %, alpha = 0.2. Measured by DetectorTrials: with
 * validation noise 0.2 % it fires within 3 evaluations of visibility in 99.8 % of plateaus and
 * 0.07 times per 1000 evaluations on a clearly improving curve. The rule cannot tell a plateau
 * from noise when the noise is comparable to the gain: keep minRelGain at about 2.5 x or more the
 * relative noise of the validation series (at 0.5 % noise with a 0.5 % gain it fires 5.8 times
 * per 1000 evaluations on an improving curve).
 *
 * <p>Figures: {@code window}, {@code best}, {@code best_step}, {@code reference_best} (B),
 * {@code window_best} (m), {@code relative_gain}, {@code limit_relative_gain}, {@code
 * s_statistic}, {@code p_value} (downward), {@code latest}, {@code latest_step}.
 */
final class PlateauDetector implements Detector {
  static final String NAME = "flattens";

  static final int DEFAULT_OVER = 5;
  static final double DEFAULT_MIN_REL_GAIN = 0.005;
  static final double DEFAULT_ALPHA = 0.2;

  private final String series;
  private final int over;
  private final double minRelGain;
  private final double alpha;
  private final SampleWindow window;
  private final double[] values;
  private final double[] scratch;
  private double reference = Double.NaN;
  private long referenceStep;

  PlateauDetector(int over, double minRelGain, double alpha) {
    this("series", over, minRelGain, alpha);
  }

  /**
   * @param over evaluations judged, 2..200
   * @param minRelGain relative improvement that counts as progress, in [0, 1)
   * @param alpha significance level of the trend test, in (0, 1)
   */
  PlateauDetector(String series, int over, double minRelGain, double alpha) {
    this.series = Figures.series(series);
    if (over < 2 || over > 200) {
      throw new IllegalArgumentException("plateau 'over' must be in 2..200, got " + over);
    }
    if (!(minRelGain >= 0 && minRelGain < 1)) {
      throw new IllegalArgumentException(
          "plateau minRelGain must be in [0, 1), got " + minRelGain);
    }
    if (!(alpha > 0 && alpha < 1)) {
      throw new IllegalArgumentException("plateau alpha must be in (0, 1), got " + alpha);
    }
    this.over = over;
    this.minRelGain = minRelGain;
    this.alpha = alpha;
    this.window = new SampleWindow(over);
    this.values = new double[over];
    this.scratch = new double[over];
  }

  @Override
  public Optional<Evidence> offer(long step, double value) {
    if (!Double.isFinite(value)) {
      return Optional.empty();
    }
    if (window.isFull()) {
      double leaving = window.value(0);
      if (!(leaving >= reference)) { // also true while reference is NaN
        reference = leaving;
        referenceStep = window.step(0);
      }
    }
    window.add(step, value);
    if (!window.isFull() || Double.isNaN(reference)) {
      return Optional.empty();
    }
    int n = window.copyValues(values);
    int bestAt = 0;
    for (int i = 1; i < n; i++) {
      if (values[i] < values[bestAt]) {
        bestAt = i;
      }
    }
    double windowBest = values[bestAt];
    double gain = relativeGain(reference, windowBest);
    if (!(gain < minRelGain)) {
      return Optional.empty();
    }
    MannKendall.Result mk = MannKendall.test(values, n, scratch);
    if (mk.pDownward() < alpha) {
      return Optional.empty();
    }
    boolean windowHoldsBest = windowBest < reference;
    double best = windowHoldsBest ? windowBest : reference;
    long bestStep = windowHoldsBest ? window.step(bestAt) : referenceStep;
    Map<String, Object> figures = new LinkedHashMap<>();
    figures.put("window", n);
    figures.put("best", best);
    figures.put("best_step", bestStep);
    figures.put("reference_best", reference);
    figures.put("window_best", windowBest);
    figures.put("relative_gain", Figures.of(gain));
    figures.put("limit_relative_gain", minRelGain);
    figures.put("s_statistic", mk.s());
    figures.put("p_value", mk.pDownward());
    figures.put("latest", value);
    figures.put("latest_step", step);
    // The sentence leads with the best value, which is what stopped improving.
    String summary = "best " + series + " " + Figures.num(reference) + " (step " + referenceStep
        + ") has not improved by " + Figures.percent(minRelGain) + " in " + n
        + " evaluations (best of those " + Figures.num(windowBest) + ", gain "
        + Figures.percent(Math.max(0, gain)) + ", latest " + Figures.num(value)
        + "); trend test p " + Figures.p(mk.pDownward()) + ".";
    return Optional.of(new Evidence(NAME, summary, figures));
  }

  static double relativeGain(double reference, double windowBest) {
    double drop = reference - windowBest;
    double scale = Math.abs(reference);
    if (scale == 0) {
      return drop > 0 ? Double.POSITIVE_INFINITY : 0;
    }
    return drop / scale;
  }

  @Override
  public void reset() {
    window.clear();
    reference = Double.NaN;
    referenceStep = 0;
  }
}
