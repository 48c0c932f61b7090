package dev.stepwarden.stats;

import java.util.Arrays;
import org.apache.commons.statistics.distribution.NormalDistribution;

/**
 * Mann-Kendall test for a monotone trend in a series x_1..x_n taken in time order.
 *
 * <p>The statistic is S = sum over i &lt; j of sgn(x_j - x_i): each later point above an earlier
 * one counts +1, each below counts -1, ties count 0. With no trend (the points exchangeable) S has
 * mean 0 and, with g groups of tied values of sizes t_1..t_g (Gilbert 1987, s16.4),
 *
 * <pre>
 *   Var(S) = [ n(n-1)(2n+5) - sum_p t_p(t_p-1)(2t_p+5) ] / 18
 * </pre>
 *
 * <p>The normal approximation uses the continuity-corrected z = (S-1)/sqrt(Var) for S &gt; 0,
 * 0 for S = 0 and (S+1)/sqrt(Var) for S &lt; 0; the upward one-sided p-value is 1 - Phi(z), the
 * downward one Phi(z), the two-sided one 2(1 - Phi(|z|)).
 *
 * <p>Exact null distribution without ties: S = N - 2D where N = n(n-1)/2 and D is the number of
 * discordant pairs, i.e. the inversion count of the ranks. Under the null every ordering of the
 * ranks is equally likely, so D follows the Mahonian distribution: inserting the m-th largest
 * element into a random ordering of m-1 adds 0..m-1 inversions with equal probability, which gives
 * the recursion P_m(d) = (1/m) sum_{j=0}^{m-1} P_{m-1}(d-j). Then P(S &gt;= s) = P(D &lt;=
 * floor((N-s)/2)). {@link #test} uses it automatically for n &lt;= {@value #EXACT_MAX_N} with no
 * ties (where the normal approximation is poor); above that, or with ties, it uses the normal
 * approximation with the tie correction. When every value is tied, Var(S) = 0 and all p-values are
 * 1: the data carry no evidence of a trend either way.
 */
public final class MannKendall {
  /** Largest n for which {@link #test} uses the exact distribution (when there are no ties). */
  public static final int EXACT_MAX_N = 10;

  /** Largest n the exact double-precision recursion accepts (cost grows as n^4/2). */
  public static final int EXACT_LIMIT = 60;

  private static final NormalDistribution STANDARD_NORMAL = NormalDistribution.of(0, 1);

  /** CUMULATIVE[n][d] = P(D &lt;= d) for n = 0..EXACT_MAX_N; built once, read on every test. */
  private static final double[][] CUMULATIVE = new double[EXACT_MAX_N + 1][];

  static {
    for (int n = 0; n <= EXACT_MAX_N; n++) {
      double[] p = inversionProbabilities(n);
      double[] cum = new double[p.length];
      double run = 0;
      for (int d = 0; d < p.length; d++) {
        run += p[d];
        cum[d] = run;
      }
      CUMULATIVE[n] = cum;
    }
  }

  private MannKendall() {}

  /**
   * The outcome of one test.
   *
   * @param n number of points
   * @param s the S statistic
   * @param varianceS Var(S) under no trend, tie-corrected
   * @param z continuity-corrected normal score (reported even when the p-values are exact)
   * @param pUpward P(S &gt;= s) under no trend: small means a rising trend
   * @param pDownward P(S &lt;= s) under no trend: small means a falling trend
   * @param pTwoSided two-sided p-value
   * @param exact whether the p-values come from the exact distribution
   * @param tieGroups number of groups of two or more equal values
   */
  public record Result(
      int n,
      long s,
      double varianceS,
      double z,
      double pUpward,
      double pDownward,
      double pTwoSided,
      boolean exact,
      int tieGroups) {}

  /** Tests x[0..n) for a trend; allocates a scratch copy (use the other form in hot paths). */
  public static Result test(double[] x, int n) {
    return test(x, n, new double[n]);
  }

  /**
   * Tests x[0..n) for a trend, using {@code scratch} (length &gt;= n) to find the ties.
   *
   * @throws IllegalArgumentException when n &lt; 2 or a value is not finite
   */
  public static Result test(double[] x, int n, double[] scratch) {
    if (n < 2 || n > x.length) {
      throw new IllegalArgumentException(
          "Mann-Kendall needs 2 <= n <= " + x.length + " points, got n = " + n);
    }
    long s = statistic(x, n);
    System.arraycopy(x, 0, scratch, 0, n);
    Arrays.sort(scratch, 0, n);
    double tieTerm = 0;
    int tieGroups = 0;
    for (int i = 0; i < n; ) {
      int j = i + 1;
      while (j < n && scratch[j] == scratch[i]) {
        j++;
      }
      int t = j - i;
      if (t > 1) {
        tieGroups++;
        tieTerm += (double) t * (t - 1) * (2.0 * t + 5);
      }
      i = j;
    }
    double var = (variance(n) * 18 - tieTerm) / 18;
    double z = z(s, var);
    if (var <= 0) {
      return new Result(n, s, 0, 0, 1, 1, 1, false, tieGroups);
    }
    if (tieGroups == 0 && n <= EXACT_MAX_N) {
      double up = exactUpperTail(n, s);
      double down = exactUpperTail(n, -s);
      return new Result(n, s, var, z, up, down, Math.min(1, 2 * Math.min(up, down)), true, 0);
    }
    return new Result(
        n, s, var, z, normalUpper(z), normalLower(z), normalTwoSided(z), false, tieGroups);
  }

  /** S = sum_{i&lt;j} sgn(x_j - x_i), O(n^2). */
  public static long statistic(double[] x, int n) {
    long s = 0;
    for (int i = 0; i < n - 1; i++) {
      double xi = x[i];
      if (!Double.isFinite(xi)) {
        throw new IllegalArgumentException(
            "Mann-Kendall needs finite values, got " + xi + " at position " + i);
      }
      for (int j = i + 1; j < n; j++) {
        double d = x[j] - xi;
        if (d > 0) {
          s++;
        } else if (d < 0) {
          s--;
        }
      }
    }
    if (!Double.isFinite(x[n - 1])) {
      throw new IllegalArgumentException(
          "Mann-Kendall needs finite values, got " + x[n - 1] + " at position " + (n - 1));
    }
    return s;
  }

  /** Var(S) without ties: n(n-1)(2n+5)/18. */
  public static double variance(int n) {
    return (double) n * (n - 1) * (2.0 * n + 5) / 18;
  }

  /** Var(S) with ties: {@code tieSizes} are the sizes of the groups of equal values. */
  public static double variance(int n, int... tieSizes) {
    double tieTerm = 0;
    for (int t : tieSizes) {
      if (t < 1) {
        throw new IllegalArgumentException("tie group sizes must be >= 1, got " + t);
      }
      tieTerm += (double) t * (t - 1) * (2.0 * t + 5);
    }
    return (variance(n) * 18 - tieTerm) / 18;
  }

  /** Continuity-corrected normal score of S (0 when Var(S) is 0). */
  public static double z(long s, double varianceS) {
    if (varianceS <= 0 || s == 0) {
      return 0;
    }
    double sd = Math.sqrt(varianceS);
    return s > 0 ? (s - 1) / sd : (s + 1) / sd;
  }

  public static double normalUpper(double z) {
    return STANDARD_NORMAL.survivalProbability(z);
  }

  public static double normalLower(double z) {
    return STANDARD_NORMAL.cumulativeProbability(z);
  }

  public static double normalTwoSided(double z) {
    return Math.min(1, 2 * STANDARD_NORMAL.survivalProbability(Math.abs(z)));
  }

  /**
   * Exact P(S &gt;= s) for n points without ties.
   *
   * @throws IllegalArgumentException when n is outside 1..{@value #EXACT_LIMIT}
   */
  public static double exactUpperTail(int n, long s) {
    if (n < 1 || n > EXACT_LIMIT) {
      throw new IllegalArgumentException(
          "exact Mann-Kendall distribution needs 1 <= n <= " + EXACT_LIMIT + ", got n = " + n);
    }
    long pairs = (long) n * (n - 1) / 2;
    if (s > pairs) {
      return 0;
    }
    if (s <= -pairs) {
      return 1;
    }
    int maxDiscordant = (int) Math.floorDiv(pairs - s, 2);
    if (n <= EXACT_MAX_N) {
      return Math.min(1, CUMULATIVE[n][maxDiscordant]);
    }
    double[] p = inversionProbabilities(n);
    double sum = 0;
    for (int d = 0; d <= maxDiscordant; d++) {
      sum += p[d];
    }
    return Math.min(1, sum);
  }

  /**
   * P(D = d), d = 0..n(n-1)/2, for the inversion count D of a uniformly random permutation of n.
   * Only additions of positive terms: no cancellation, so tiny tail probabilities stay accurate.
   */
  public static double[] inversionProbabilities(int n) {
    if (n < 0 || n > EXACT_LIMIT) {
      throw new IllegalArgumentException(
          "inversion distribution needs 0 <= n <= " + EXACT_LIMIT + ", got n = " + n);
    }
    double[] p = {1.0};
    for (int m = 2; m <= n; m++) {
      double[] q = new double[p.length + m - 1];
      for (int d = 0; d < q.length; d++) {
        double sum = 0;
        for (int j = Math.max(0, d - (p.length - 1)); j <= Math.min(d, m - 1); j++) {
          sum += p[d - j];
        }
        q[d] = sum / m;
      }
      p = q;
    }
    return p;
  }

  /**
   * Number of permutations of n with d inversions (the Mahonian numbers), exact in long for
   * n &lt;= 20 (20! &lt; 2^63). A separate integer path, so the double one can be checked.
   */
  public static long[] inversionCounts(int n) {
    if (n < 0 || n > 20) {
      throw new IllegalArgumentException("exact inversion counts need 0 <= n <= 20, got n = " + n);
    }
    long[] c = {1L};
    for (int m = 2; m <= n; m++) {
      long[] q = new long[c.length + m - 1];
      for (int d = 0; d < q.length; d++) {
        long sum = 0;
        for (int j = Math.max(0, d - (c.length - 1)); j <= Math.min(d, m - 1); j++) {
          sum += c[d - j];
        }
        q[d] = sum;
      }
      c = q;
    }
    return c;
  }
}
