package dev.stepwarden.detectors;

import dev.stepwarden.stats.Prechelt;
import java.util.LinkedHashMap;
import java.util.Map;
import java.util.Optional;

/**
 * Overfitting by one of the three criteria of Prechelt 1998, s2.2 (see {@link Prechelt}): GL
 * (generalization loss above a percentage), PQ (generalization loss per unit of training
 * progress above a quotient) or UP (validation rose at the end of s successive strips).
 *
 * <p>Two series feed it. The watched series is validation: each {@link #offer} is one evaluation
 * (Prechelt's "epoch"). Training values, which trainers usually log far more often, arrive through
 * {@link #offerTrain}; the training error of an evaluation, E_tr(t), is the mean of the training
 * values received since the previous evaluation (or the last one known, when none arrived in
 * between). {@link #offerPair} does both for trainers that log the two together. A strip is
 * {@code strip} consecutive evaluations counted from the last reset; PQ and UP are judged at strip
 * ends only, GL at every evaluation. Lower is better and errors must be positive; non-finite or
 * non-positive values are skipped. Memory: one strip of training errors and a few scalars.
 *
 * <p>Proposed defaults GL with threshold 5, strip 5 (PQ 0.75, UP 3 as alternatives). Measured by
 * DetectorTrials: GL stays below 0.3 spurious firings per 1000 evaluations up to 1 % validation
 * noise but fires often at 2 % (56 per 1000), where UP (1.0) or PQ (0.16) hold; PQ reacts slowly
 * when the training values are noisy mini-batch losses, because noise inflates P_k.
 *
 * <p>Figures: {@code kind}, {@code evaluation}, {@code validation}, {@code best}, {@code
 * best_step}, {@code generalization_loss}, then for PQ {@code training_progress}, {@code
 * progress_quotient}, for UP {@code successive_rises}, {@code previous_strip_end}; and {@code
 * strip}, {@code limit}.
 */
public final class OverfitDetector implements Detector {
  static final String NAME = "overfits";

  /** Which of Prechelt's stopping criteria to apply. */
  enum Kind {
    /** GL(t) &gt; threshold (percent). */
    GL,
    /** At a strip end, GL(t) / P_k(t) &gt; threshold. */
    PQ,
    /** At a strip end, validation rose for threshold (an integer s) successive strips. */
    UP
  }

  static final Kind DEFAULT_KIND = Kind.GL;
  static final double DEFAULT_GL_THRESHOLD = 5;
  static final double DEFAULT_PQ_THRESHOLD = 0.75;
  static final int DEFAULT_UP_STRIPS = 3;

  private final String series;
  private final Kind kind;
  private final double threshold;
  private final int strip;
  private final SampleWindow trainStrip;
  private final double[] stripValues;
  private double trainSum;
  private int trainCount;
  private double lastTrain = Double.NaN;
  private double best = Double.POSITIVE_INFINITY;
  private long bestStep;
  private long evaluations;
  private double previousStripEnd = Double.NaN;
  private int rises;

  OverfitDetector(Kind kind, double threshold, int strip) {
    this("validation", kind, threshold, strip);
  }

  /**
   * @param kind GL, PQ or UP
   * @param threshold GL: percent &gt; 0 (Prechelt's alpha); PQ: quotient &gt; 0; UP: whole number
   *     of strips s &gt;= 1
   * @param strip evaluations per strip k &gt;= 2 (Prechelt: 5)
   */
  OverfitDetector(String series, Kind kind, double threshold, int strip) {
    this.series = Figures.series(series);
    if (kind == null) {
      throw new IllegalArgumentException("overfit kind must be one of GL, PQ, UP, got null");
    }
    DetectorKind.OVERFITS.param("above").require(threshold);
    if (kind == Kind.UP && (threshold != Math.rint(threshold) || threshold > 1000)) {
      throw new IllegalArgumentException(
          "overfit UP threshold is a whole number of strips (1..1000), got " + threshold);
    }
    DetectorKind.OVERFITS.param("strip").requireInt(strip);
    this.kind = kind;
    this.threshold = threshold;
    this.strip = strip;
    this.trainStrip = new SampleWindow(strip);
    this.stripValues = new double[strip];
  }

  /** The threshold a guard file asks for, or the criterion's default when it gives none. */
  static double threshold(Kind kind, Object above) {
    if (above instanceof Number n) {
      return n.doubleValue();
    }
    return switch (kind) {
      case GL -> DEFAULT_GL_THRESHOLD;
      case PQ -> DEFAULT_PQ_THRESHOLD;
      case UP -> DEFAULT_UP_STRIPS;
    };
  }

  /** A training value between evaluations; never fires by itself. */
  public void offerTrain(long step, double train) {
    if (Double.isFinite(train) && train > 0) {
      trainSum += train;
      trainCount++;
    }
  }

  /** A training and a validation value logged together: one evaluation. */
  Optional<Evidence> offerPair(long step, double train, double validation) {
    offerTrain(step, train);
    return offer(step, validation);
  }

  /** One validation evaluation. */
  @Override
  public Optional<Evidence> offer(long step, double validation) {
    if (!Double.isFinite(validation) || !(validation > 0)) {
      return Optional.empty();
    }
    if (trainCount > 0) {
      lastTrain = trainSum / trainCount;
      trainSum = 0;
      trainCount = 0;
    }
    if (!Double.isNaN(lastTrain)) {
      trainStrip.add(step, lastTrain);
    }
    if (validation < best) {
      best = validation;
      bestStep = step;
    }
    evaluations++;
    double gl = Prechelt.generalizationLoss(validation, best);
    boolean stripEnd = evaluations % strip == 0;
    switch (kind) {
      case GL:
        return gl > threshold ? Optional.of(evidence(step, validation, gl, null)) : Optional.empty();
      case PQ:
        if (!stripEnd || !trainStrip.isFull()) {
          return Optional.empty();
        }
        int k = trainStrip.copyValues(stripValues);
        double progress = Prechelt.trainingProgress(stripValues, 0, k);
        double pq = Prechelt.progressQuotient(gl, progress);
        return pq > threshold
            ? Optional.of(evidence(step, validation, gl, new double[] {progress, pq}))
            : Optional.empty();
      case UP:
        if (!stripEnd) {
          return Optional.empty();
        }
        double previous = previousStripEnd;
        if (!Double.isNaN(previous)) {
          rises = validation > previous ? rises + 1 : 0;
        }
        previousStripEnd = validation;
        return rises >= threshold
            ? Optional.of(evidence(step, validation, gl, new double[] {previous}))
            : Optional.empty();
      default:
        throw new IllegalStateException("unknown overfit kind " + kind);
    }
  }

  private Evidence evidence(long step, double validation, double gl, double[] extra) {
    Map<String, Object> figures = new LinkedHashMap<>();
    figures.put("kind", kind.name());
    figures.put("evaluation", evaluations);
    figures.put("validation", validation);
    figures.put("best", best);
    figures.put("best_step", bestStep);
    figures.put("generalization_loss", gl);
    String head =
        series
            + " "
            + Figures.num(validation)
            + " at step "
            + step
            + " is "
            + Figures.num(gl)
            + " % above its best "
            + Figures.num(best)
            + " of step "
            + bestStep;
    String summary;
    switch (kind) {
      case PQ:
        figures.put("training_progress", extra[0]);
        figures.put("progress_quotient", Figures.of(extra[1]));
        summary =
            head
                + " while training progress over the last "
                + strip
                + " evaluations is "
                + Figures.num(extra[0])
                + " per mille: progress quotient "
                + Figures.num(extra[1])
                + " > "
                + Figures.num(threshold)
                + ".";
        break;
      case UP:
        figures.put("successive_rises", rises);
        figures.put("previous_strip_end", extra[0]);
        summary =
            head
                + "; it ended each of the last "
                + rises
                + " strips of "
                + strip
                + " evaluations higher than the strip before (previous strip end "
                + Figures.num(extra[0])
                + ").";
        break;
      default:
        summary = head + ": generalization loss " + Figures.num(gl) + " > " + Figures.num(threshold) + ".";
        break;
    }
    figures.put("strip", strip);
    figures.put("limit", threshold);
    return new Evidence(NAME, summary, figures);
  }

  @Override
  public void reset() {
    trainStrip.clear();
    trainSum = 0;
    trainCount = 0;
    lastTrain = Double.NaN;
    best = Double.POSITIVE_INFINITY;
    bestStep = 0;
    evaluations = 0;
    previousStripEnd = Double.NaN;
    rises = 0;
  }
}
