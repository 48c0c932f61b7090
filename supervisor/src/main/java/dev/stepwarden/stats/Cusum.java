package dev.stepwarden.stats;

/**
 * One-sided (upper) tabular CUSUM (Page 1954) for a rise of the mean above a target mu0.
 *
 * <pre>
 *   C+_0 = 0,   C+_i = max(0, x_i - (mu0 + K) + C+_{i-1}),   signal when C+_i &gt; H
 * </pre>
 *
 * <p>K (the allowance, often half the shift worth detecting) keeps in-control noise from
 * accumulating; H is the decision interval. Both are usually set in units of the noise standard
 * deviation (common practice: K = 0.5 sigma, H = 4 or 5 sigma). After a signal the change point is
 * estimated as the start of the current run of positive C+: {@link #onsetIndex()} is the index of
 * the first observation of that run (0-based, counting every offered observation).
 *
 * <p>{@link #backwardOnset} runs the same sum from the newest point back in time over a window
 * that ends in a rise: T_j = sum_{i=j}^{n-1} (x_i - (mu0 + K)). The rise's onset is the j that
 * maximises T_j (the start of the suffix with the largest excess); the walk stops once T has
 * fallen more than H below its maximum (the run is well into the in-control past, and an older
 * excursion should not be mistaken for this one). A maximum of H or less means no rise.
 */
public final class Cusum {
  private final double reference;
  private final double threshold;
  private double upper;
  private long index = -1;
  private long runStart = -1;

  /**
   * @param target mu0, the in-control mean
   * @param allowance K &gt;= 0
   * @param threshold H &gt; 0
   */
  public Cusum(double target, double allowance, double threshold) {
    if (!Double.isFinite(target)) {
      throw new IllegalArgumentException("CUSUM target must be finite, got " + target);
    }
    if (!(allowance >= 0) || !Double.isFinite(allowance)) {
      throw new IllegalArgumentException(
          "CUSUM allowance must be finite and >= 0, got " + allowance);
    }
    if (!(threshold > 0) || !Double.isFinite(threshold)) {
      throw new IllegalArgumentException(
          "CUSUM threshold must be finite and > 0, got " + threshold);
    }
    this.reference = target + allowance;
    this.threshold = threshold;
  }

  /** Adds x_i; returns whether C+_i &gt; H. */
  public boolean offer(double x) {
    index++;
    double next = Math.max(0, x - reference + upper);
    if (next > 0 && upper == 0) {
      runStart = index;
    } else if (next == 0) {
      runStart = -1;
    }
    upper = next;
    return upper > threshold;
  }

  /** The current C+. */
  public double value() {
    return upper;
  }

  /** Whether the last offer signalled. */
  public boolean signalling() {
    return upper > threshold;
  }

  /** Index of the first observation of the current positive run of C+, or -1 when C+ = 0. */
  public long onsetIndex() {
    return runStart;
  }

  /** Number of observations offered since construction or the last reset. */
  public long count() {
    return index + 1;
  }

  public void reset() {
    upper = 0;
    index = -1;
    runStart = -1;
  }

  /**
   * Backward run over x[0..n) (oldest first) against {@code reference} = mu0 + K.
   *
   * @return the index where the rise at the end of the window began, or -1 when the largest
   *     suffix excess is not above {@code threshold}
   */
  public static int backwardOnset(double[] x, int n, double reference, double threshold) {
    if (n < 1 || n > x.length) {
      throw new IllegalArgumentException(
          "backward CUSUM needs 1 <= n <= " + x.length + " points, got n = " + n);
    }
    if (!(threshold > 0)) {
      throw new IllegalArgumentException("CUSUM threshold must be > 0, got " + threshold);
    }
    double sum = 0;
    double best = 0;
    int bestIndex = -1;
    for (int j = n - 1; j >= 0; j--) {
      sum += x[j] - reference;
      if (sum > best) {
        best = sum;
        bestIndex = j;
      } else if (sum < best - threshold) {
        break;
      }
    }
    return best > threshold ? bestIndex : -1;
  }
}
