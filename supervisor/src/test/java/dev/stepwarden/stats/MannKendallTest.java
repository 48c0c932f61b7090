package dev.stepwarden.stats;

import static org.assertj.core.api.Assertions.assertThat;
import static org.assertj.core.api.Assertions.assertThatThrownBy;
import static org.assertj.core.api.Assertions.within;

import java.util.ArrayList;
import java.util.HashMap;
import java.util.List;
import java.util.Map;
import org.junit.jupiter.api.Test;

class MannKendallTest {

  @Test
  void exactUpperTailMatchesGilbertTableA18() {
    // Gilbert 1987, Statistical Methods for Environmental Pollution Monitoring, Table A18
    // (probability of S >= s under no trend, no ties), three decimals.
    assertThat(MannKendall.exactUpperTail(4, 6)).isCloseTo(0.042, within(0.0005));
    assertThat(MannKendall.exactUpperTail(5, 8)).isCloseTo(0.042, within(0.0005));
    assertThat(MannKendall.exactUpperTail(6, 11)).isCloseTo(0.028, within(0.0005));
    assertThat(MannKendall.exactUpperTail(9, 20)).isCloseTo(0.022, within(0.0005));
  }

  @Test
  void inversionCountsAreTheMahonianNumbers() {
    // OEIS A008302 (number of permutations of n with k inversions), rows n = 4 and n = 5.
    assertThat(MannKendall.inversionCounts(4)).containsExactly(1, 3, 5, 6, 5, 3, 1);
    assertThat(MannKendall.inversionCounts(5))
        .containsExactly(1, 4, 9, 15, 20, 22, 20, 15, 9, 4, 1);
  }

  @Test
  void doubleRecursionAgreesWithIntegerCountsUpToTwenty() {
    // Two independent paths: exact long counts / n! against the probability recursion.
    for (int n = 1; n <= 20; n++) {
      long[] counts = MannKendall.inversionCounts(n);
      double[] p = MannKendall.inversionProbabilities(n);
      double factorial = 1;
      long total = 0;
      for (int i = 2; i <= n; i++) {
        factorial *= i;
      }
      assertThat(p).hasSize(counts.length);
      for (int d = 0; d < counts.length; d++) {
        total += counts[d];
        assertThat(p[d]).isCloseTo(counts[d] / factorial, within(1e-12 * (1 + p[d])));
      }
      assertThat((double) total).isCloseTo(factorial, within(factorial * 1e-15));
    }
  }

  @Test
  void exactDistributionMatchesEnumerationOfAllPermutations() {
    // Independent check: enumerate all 7! orderings of 7 distinct values, tabulate S.
    int n = 7;
    Map<Long, Integer> counts = new HashMap<>();
    for (int[] perm : permutations(n)) {
      double[] x = new double[n];
      for (int i = 0; i < n; i++) {
        x[i] = perm[i];
      }
      counts.merge(MannKendall.statistic(x, n), 1, Integer::sum);
    }
    for (long s = -22; s <= 22; s++) {
      int atLeast = 0;
      for (Map.Entry<Long, Integer> e : counts.entrySet()) {
        if (e.getKey() >= s) {
          atLeast += e.getValue();
        }
      }
      assertThat(MannKendall.exactUpperTail(n, s)).isCloseTo(atLeast / 5040.0, within(1e-12));
    }
  }

  @Test
  void normalPathReproducesEpaExample17_7FromNAndSAlone() {
    // US EPA 2009, Unified Guidance, Example 17-7: n = 10, S = 25, no ties.
    // The example's data are not reproduced here; Var(S), z and p follow from n and S.
    double var = MannKendall.variance(10);
    assertThat(var).isCloseTo(125.0, within(1e-12)); // n(n-1)(2n+5)/18
    double z = MannKendall.z(25, var);
    assertThat(z).isCloseTo(2.1466, within(0.00005)); // (S-1)/sqrt(Var)
    assertThat(MannKendall.normalTwoSided(z)).isCloseTo(0.0318, within(0.00005));
  }

  @Test
  void tieCorrectedVarianceOnHandComputedSeries() {
    // Hand-computed: 1,2,2,3,3,3,4 has a tie group of 2 and one of 3.
    // Var = [7*6*19 - 2*1*9 - 3*2*11] / 18 = (798 - 18 - 66) / 18 = 714/18 (Gilbert 1987, s16.4).
    // S = 21 pairs - 4 tied pairs = 17 (all untied pairs increase); z = 16 / sqrt(714/18).
    double[] x = {1, 2, 2, 3, 3, 3, 4};
    MannKendall.Result r = MannKendall.test(x, x.length);
    assertThat(r.s()).isEqualTo(17);
    assertThat(r.tieGroups()).isEqualTo(2);
    assertThat(r.varianceS()).isCloseTo(714.0 / 18, within(1e-12));
    assertThat(MannKendall.variance(7, 2, 3)).isCloseTo(714.0 / 18, within(1e-12));
    assertThat(r.z()).isCloseTo(16 / Math.sqrt(714.0 / 18), within(1e-12));
    assertThat(r.exact()).isFalse();
  }

  @Test
  void tieCorrectedVarianceEqualsVarianceOfPermutationDistribution() {
    // Independent check: under no trend every ordering of a multiset is equally likely, so the
    // exact Var(S) is the mean of S^2 over all n! orderings; it must equal the corrected formula.
    double[][] multisets = {
      {1, 1, 2, 3, 3, 3},
      {5, 5, 5, 5, 7, 7, 9},
      {0, 0, 1, 1, 2, 2, 3},
      {4, 4, 4, 4, 4, 8}
    };
    for (double[] values : multisets) {
      int n = values.length;
      double sumSq = 0;
      long sum = 0;
      int orderings = 0;
      for (int[] perm : permutations(n)) {
        double[] x = new double[n];
        for (int i = 0; i < n; i++) {
          x[i] = values[perm[i]];
        }
        long s = MannKendall.statistic(x, n);
        sum += s;
        sumSq += (double) s * s;
        orderings++;
      }
      assertThat(sum).isZero();
      MannKendall.Result r = MannKendall.test(values, n);
      assertThat(r.varianceS()).isCloseTo(sumSq / orderings, within(1e-9));
    }
  }

  @Test
  void normalApproximationApproachesExactDistributionForThirtyPoints() {
    // Common practice: the normal approximation is adequate beyond about ten points.
    // N = 435 pairs is odd, so without ties S is odd: compare at attainable values only.
    int n = 30;
    double var = MannKendall.variance(n);
    for (long s = 1; s <= 200; s += 18) {
      double exact = MannKendall.exactUpperTail(n, s);
      double normal = MannKendall.normalUpper(MannKendall.z(s, var));
      assertThat(normal).isCloseTo(exact, within(0.005));
    }
  }

  @Test
  void usesExactDistributionForSmallSeriesWithoutTiesOnly() {
    double[] rising = {1, 2, 3, 4, 5, 6};
    MannKendall.Result r = MannKendall.test(rising, rising.length);
    assertThat(r.exact()).isTrue();
    assertThat(r.s()).isEqualTo(15);
    assertThat(r.pUpward()).isCloseTo(1.0 / 720, within(1e-15));
    assertThat(r.pDownward()).isCloseTo(1.0, within(1e-15));
    assertThat(r.pTwoSided()).isCloseTo(2.0 / 720, within(1e-15));

    double[] tied = {1, 2, 2, 4, 5, 6};
    assertThat(MannKendall.test(tied, tied.length).exact()).isFalse();

    double[] longer = new double[11];
    for (int i = 0; i < longer.length; i++) {
      longer[i] = i;
    }
    MannKendall.Result l = MannKendall.test(longer, longer.length);
    assertThat(l.exact()).isFalse();
    assertThat(l.pUpward()).isCloseTo(MannKendall.normalUpper(l.z()), within(1e-15));
  }

  @Test
  void fallingSeriesHasSmallDownwardPValue() {
    double[] falling = {9, 7, 8, 5, 4, 4.5, 2, 1};
    MannKendall.Result r = MannKendall.test(falling, falling.length);
    assertThat(r.s()).isNegative();
    assertThat(r.pDownward()).isLessThan(0.01);
    assertThat(r.pUpward()).isGreaterThan(0.99);
  }

  @Test
  void allTiedSeriesCarriesNoEvidence() {
    double[] flat = {3, 3, 3, 3, 3};
    MannKendall.Result r = MannKendall.test(flat, flat.length);
    assertThat(r.s()).isZero();
    assertThat(r.varianceS()).isZero();
    assertThat(r.pUpward()).isEqualTo(1.0);
    assertThat(r.pDownward()).isEqualTo(1.0);
  }

  @Test
  void rejectsTooFewOrNonFinitePoints() {
    assertThatThrownBy(() -> MannKendall.test(new double[] {1}, 1))
        .isInstanceOf(IllegalArgumentException.class)
        .hasMessageContaining("n = 1");
    assertThatThrownBy(() -> MannKendall.test(new double[] {1, Double.NaN, 2}, 3))
        .isInstanceOf(IllegalArgumentException.class)
        .hasMessageContaining("NaN");
    assertThatThrownBy(() -> MannKendall.exactUpperTail(61, 0))
        .isInstanceOf(IllegalArgumentException.class)
        .hasMessageContaining("n = 61");
  }

  /** All permutations of 0..n-1 (Heap's algorithm). */
  static List<int[]> permutations(int n) {
    List<int[]> out = new ArrayList<>();
    int[] a = new int[n];
    for (int i = 0; i < n; i++) {
      a[i] = i;
    }
    int[] c = new int[n];
    out.add(a.clone());
    int i = 0;
    while (i < n) {
      if (c[i] < i) {
        int j = (i % 2 == 0) ? 0 : c[i];
        int t = a[j];
        a[j] = a[i];
        a[i] = t;
        out.add(a.clone());
        c[i]++;
        i = 0;
      } else {
        c[i] = 0;
        i++;
      }
    }
    return out;
  }
}
