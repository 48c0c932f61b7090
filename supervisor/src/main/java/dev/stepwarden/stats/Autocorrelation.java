package dev.stepwarden.stats;

/**
 * Lag-1 sample autocorrelation, the usual estimator r_1 = c_1 / c_0 with
 * c_k = sum_{t=1}^{n-k} (x_t - mean)(x_{t+k} - mean) (the common 1/n factors cancel).
 *
 * <p>It lies in [-1, 1]: near 0 for independent noise (its expectation for n independent points is
 * about -1/n), near -1 when the series alternates up and down. A constant series has c_0 = 0 and
 * no defined autocorrelation: the result is then NaN, which fails every threshold comparison.
 */
public final class Autocorrelation {
  private Autocorrelation() {}

  /** r_1 of x[from..from+n); needs n &gt;= 2. */
  public static double lag1(double[] x, int from, int n) {
    if (n < 2 || from < 0 || from + n > x.length) {
      throw new IllegalArgumentException(
          "lag-1 autocorrelation needs at least 2 points inside the array, got from = "
              + from
              + ", n = "
              + n
              + ", length = "
              + x.length);
    }
    double mean = 0;
    for (int i = from; i < from + n; i++) {
      mean += x[i];
    }
    mean /= n;
    double c0 = 0;
    double c1 = 0;
    double previous = x[from] - mean;
    c0 += previous * previous;
    for (int i = from + 1; i < from + n; i++) {
      double d = x[i] - mean;
      c0 += d * d;
      c1 += d * previous;
      previous = d;
    }
    return c0 == 0 ? Double.NaN : c1 / c0;
  }
}
