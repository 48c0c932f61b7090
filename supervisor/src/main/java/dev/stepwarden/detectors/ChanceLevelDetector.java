package dev.stepwarden.detectors;

import dev.stepwarden.stats.Ema;
import java.util.LinkedHashMap;
import java.util.Map;
import java.util.Optional;

/**
 * Learning nothing: by step {@code byStep} a classification cross-entropy loss is still within
 * {@code tolerance} of ln(classes), the loss of predicting the uniform distribution over the
 * classes (-ln(1/C) = ln C).
 *
 * <p>The loss is smoothed by a bias-corrected EMA (decay {@code beta}, see {@link Ema}) and b is
 * the best (lowest) smoothed value since the last reset. At every point with step &gt;= byStep it
 * fires when b &gt;= ln(C) - tolerance: the loss has never got meaningfully below chance. A loss
 * that stays far above chance also counts (it is not improving either). Non-finite values are
 * skipped.
 *
 * <p>Figures: {@code classes}, {@code chance_level}, {@code tolerance}, {@code by_step}, {@code
 * smoothed}, {@code best_smoothed}, {@code step}.
 */
final class ChanceLevelDetector implements Detector {
  static final String NAME = "stuck_at_chance";

  static final double DEFAULT_TOLERANCE = 0.05;
  static final double DEFAULT_BETA = 0.9;

  private final String series;
  private final int classes;
  private final double chance;
  private final double tolerance;
  private final long byStep;
  private final Ema ema;
  private double best = Double.POSITIVE_INFINITY;

  ChanceLevelDetector(int classes, double tolerance, long byStep) {
    this("series", classes, tolerance, byStep, DEFAULT_BETA);
  }

  /**
   * @param classes number of classes C &gt;= 2
   * @param tolerance nats below ln C still called chance, in (0, ln C)
   * @param byStep the step by which the loss must have left chance level, &gt;= 0
   * @param beta EMA decay in [0, 1)
   */
  ChanceLevelDetector(String series, int classes, double tolerance, long byStep, double beta) {
    this.series = Figures.series(series);
    DetectorKind.STUCK_AT_CHANCE.param("classes").requireInt(classes);
    double lnC = Math.log(classes);
    if (!(tolerance > 0 && tolerance < lnC)) {
      throw new IllegalArgumentException(
          "chance-level tolerance must be in (0, ln " + classes + " = " + lnC + "), got "
              + tolerance);
    }
    if (byStep < 0) {
      throw new IllegalArgumentException("chance-level byStep must be >= 0, got " + byStep);
    }
    if (!(beta >= 0 && beta < 1)) {
      throw new IllegalArgumentException("chance-level beta must be in [0, 1), got " + beta);
    }
    this.classes = classes;
    this.chance = lnC;
    this.tolerance = tolerance;
    this.byStep = byStep;
    this.ema = new Ema(beta);
  }

  @Override
  public Optional<Evidence> offer(long step, double value) {
    if (!Double.isFinite(value)) {
      return Optional.empty();
    }
    double smoothed = ema.offer(value);
    best = Math.min(best, smoothed);
    if (step < byStep || best < chance - tolerance) {
      return Optional.empty();
    }
    Map<String, Object> figures = new LinkedHashMap<>();
    figures.put("classes", classes);
    figures.put("chance_level", chance);
    figures.put("tolerance", tolerance);
    figures.put("by_step", byStep);
    figures.put("smoothed", smoothed);
    figures.put("best_smoothed", best);
    figures.put("step", step);
    String summary =
        series
            + " at step "
            + step
            + " (smoothed "
            + Figures.num(smoothed)
            + ", best "
            + Figures.num(best)
            + ") never got more than "
            + Figures.num(tolerance)
            + " below the chance level ln "
            + classes
            + " = "
            + Figures.num(chance)
            + " by step "
            + byStep
            + ".";
    return Optional.of(new Evidence(NAME, summary, figures));
  }

  @Override
  public void reset() {
    ema.reset();
    best = Double.POSITIVE_INFINITY;
  }
}
