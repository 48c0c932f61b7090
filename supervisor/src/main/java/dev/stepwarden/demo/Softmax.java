package dev.stepwarden.demo;

/**
 * Softmax cross-entropy on raw logits, computed through a shifted log-sum-exp so that large logits
 * do not overflow: {@code log sum exp(z) = m + log sum exp(z - m)} with {@code m = max z}
 * (Goodfellow, Bengio and Courville 2016, Deep Learning, s4.1 "Overflow and underflow").
 */
final class Softmax {
  private Softmax() {}

  /** {@code log(sum_k exp(z[from + k]))} for {@code k < n}; NaN if any logit is NaN. */
  static double logSumExp(double[] z, int from, int n) {
    double max = Double.NEGATIVE_INFINITY;
    for (int k = 0; k < n; k++) {
      double v = z[from + k];
      if (Double.isNaN(v)) {
        return Double.NaN;
      }
      max = Math.max(max, v);
    }
    if (Double.isInfinite(max)) {
      return max; // all -inf gives -inf; any +inf dominates the sum
    }
    double sum = 0.0;
    for (int k = 0; k < n; k++) {
      sum += Math.exp(z[from + k] - max);
    }
    return max + Math.log(sum);
  }

  /** {@code -log softmax(z)[label]}, the cross-entropy of a one-hot target. */
  static double crossEntropy(double[] z, int from, int n, int label) {
    return logSumExp(z, from, n) - z[from + label];
  }

  /** Writes {@code softmax(z)} into {@code p[0..n)} and returns the log-sum-exp. */
  static double probabilities(double[] z, int from, int n, double[] p) {
    double lse = logSumExp(z, from, n);
    for (int k = 0; k < n; k++) {
      p[k] = Math.exp(z[from + k] - lse);
    }
    return lse;
  }
}
