package dev.stepwarden.stats;

import java.util.Arrays;

/**
 * Sen's slope estimator (Sen 1968): the median of the pairwise slopes (x_j - x_i) / (j - i) over
 * all i &lt; j, for points equally spaced in time (here: one per sample or per evaluation).
 *
 * <p>It is the slope that goes with the Mann-Kendall test: robust to outliers (about 29 % of the
 * points may be wild before it breaks down) and unbiased for a straight line plus symmetric noise.
 * With m = n(n-1)/2 pairs the median is the middle slope (odd m) or the mean of the two middle ones
 * (even m). O(n^2 log n), meant for windows up to a few hundred points.
 */
public final class SensSlope {
  private SensSlope() {}

  /** Number of pairwise slopes for n points: the scratch size {@link #slope} needs. */
  public static int pairs(int n) {
    return n * (n - 1) / 2;
  }

  /** Sen's slope of y[0..n) per index step; allocates its scratch. */
  public static double slope(double[] y, int n) {
    return slope(y, n, new double[pairs(n)]);
  }

  /**
   * Sen's slope of y[0..n) per index step, using {@code scratch} (length &gt;= n(n-1)/2).
   *
   * @throws IllegalArgumentException when n &lt; 2
   */
  public static double slope(double[] y, int n, double[] scratch) {
    if (n < 2 || n > y.length) {
      throw new IllegalArgumentException(
          "Sen's slope needs 2 <= n <= " + y.length + " points, got n = " + n);
    }
    int m = 0;
    for (int i = 0; i < n - 1; i++) {
      for (int j = i + 1; j < n; j++) {
        scratch[m++] = (y[j] - y[i]) / (j - i);
      }
    }
    Arrays.sort(scratch, 0, m);
    return (m % 2 == 1) ? scratch[m / 2] : (scratch[m / 2 - 1] + scratch[m / 2]) / 2;
  }
}
