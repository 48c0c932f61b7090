package dev.stepwarden.stats;

/**
 * The early-stopping quantities of Prechelt 1998 ("Early Stopping - But When?", Neural Networks:
 * Tricks of the Trade, LNCS 1524, s2.2), for error series where lower is better.
 *
 * <ul>
 *   <li>generalization loss GL(t) = 100 (E_va(t) / E_opt(t) - 1), E_opt(t) the lowest validation
 *       error up to t: the relative excess of validation error over its best, in percent;
 *   <li>training progress over a strip of k epochs ending at t, P_k(t) = 1000 (sum_{t'=t-k+1..t}
 *       E_tr(t') / (k min_{t'=t-k+1..t} E_tr(t')) - 1): how much the strip's average training
 *       error exceeds its minimum, in per mille; large while training still moves, near 0 once
 *       it has stalled;
 *   <li>progress quotient PQ(t) = GL(t) / P_k(t): a high generalization loss counts more when
 *       training is no longer making progress;
 *   <li>UP_s: the validation error at the end of a strip was higher than at the end of the
 *       previous strip, for s successive strips (stop when UP_{s-1} held at t-k and E_va(t) &gt;
 *       E_va(t-k)).
 * </ul>
 * Errors are assumed positive (losses, error rates); the ratios are undefined otherwise.
 */
public final class Prechelt {
  /** Prechelt's strip length. */
  public static final int DEFAULT_STRIP = 5;

  private Prechelt() {}

  /** GL = 100 (validation / bestValidation - 1). */
  public static double generalizationLoss(double validation, double bestValidation) {
    if (!(bestValidation > 0)) {
      throw new IllegalArgumentException(
          "generalization loss needs a positive best validation error, got " + bestValidation);
    }
    return 100 * (validation / bestValidation - 1);
  }

  /** P_k over train[from..from+k) = 1000 (mean / min - 1). */
  public static double trainingProgress(double[] train, int from, int k) {
    if (k < 1 || from < 0 || from + k > train.length) {
      throw new IllegalArgumentException(
          "training progress needs a strip of k >= 1 values inside the array, got from = "
              + from
              + ", k = "
              + k);
    }
    double sum = 0;
    double min = Double.POSITIVE_INFINITY;
    for (int i = from; i < from + k; i++) {
      sum += train[i];
      min = Math.min(min, train[i]);
    }
    if (!(min > 0)) {
      throw new IllegalArgumentException(
          "training progress needs positive training errors, got minimum " + min);
    }
    return 1000 * (sum / (k * min) - 1);
  }

  /** PQ = GL / P_k; infinite when training has fully stalled (P_k = 0) with GL &gt; 0. */
  public static double progressQuotient(double generalizationLoss, double trainingProgress) {
    if (trainingProgress == 0) {
      return generalizationLoss > 0 ? Double.POSITIVE_INFINITY : 0;
    }
    return generalizationLoss / trainingProgress;
  }
}
