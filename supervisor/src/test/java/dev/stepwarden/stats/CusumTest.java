package dev.stepwarden.stats;

import static org.assertj.core.api.Assertions.assertThat;
import static org.assertj.core.api.Assertions.assertThatThrownBy;
import static org.assertj.core.api.Assertions.within;

import java.util.List;
import net.jqwik.api.ForAll;
import net.jqwik.api.Property;
import net.jqwik.api.constraints.DoubleRange;
import net.jqwik.api.constraints.Scale;
import net.jqwik.api.constraints.Size;
import org.junit.jupiter.api.Test;

class CusumTest {

  @Test
  void followsPageRecursionOnHandComputedSequence() {
    // Hand-computed with mu0 = 10, K = 0.5, H = 5 (reference 10.5):
    // x    10   11   9    12   13   12   11
    // C+   0    0.5  0    1.5  4.0  5.5  6.0   -> first signal at index 5, run started at 3
    Cusum c = new Cusum(10, 0.5, 5);
    double[] x = {10, 11, 9, 12, 13, 12, 11};
    double[] expected = {0, 0.5, 0, 1.5, 4.0, 5.5, 6.0};
    long[] onset = {-1, 1, -1, 3, 3, 3, 3};
    boolean[] signal = {false, false, false, false, false, true, true};
    for (int i = 0; i < x.length; i++) {
      assertThat(c.offer(x[i])).as("signal at %d", i).isEqualTo(signal[i]);
      assertThat(c.value()).as("C+ at %d", i).isCloseTo(expected[i], within(1e-12));
      assertThat(c.onsetIndex()).as("onset at %d", i).isEqualTo(onset[i]);
    }
    assertThat(c.count()).isEqualTo(7);
    c.reset();
    assertThat(c.value()).isZero();
    assertThat(c.onsetIndex()).isEqualTo(-1);
  }

  @Test
  void backwardRunFindsTheSameOnsetAsTheForwardRun() {
    // Hand-computed on the sequence above, from the newest point back (reference 10.5):
    // suffix sums 0.5, 2.0, 4.5, 6.0, 4.5, 5.0, 4.5 -> maximum 6.0 > H = 5 at index 3.
    double[] x = {10, 11, 9, 12, 13, 12, 11};
    assertThat(Cusum.backwardOnset(x, x.length, 10.5, 5)).isEqualTo(3);
    // The same excess is not enough against a higher threshold.
    assertThat(Cusum.backwardOnset(x, x.length, 10.5, 6)).isEqualTo(-1);
  }

  @Test
  void backwardRunStopsAtTheMostRecentRise() {
    // Hand-computed: an older excursion (indices 0-1) larger than the recent one (5-7) must not
    // win: going back from the end, the sum falls more than H below its maximum first.
    double[] x = {30, 30, 0, 0, 0, 0, 0, 0, 8, 8, 8};
    // reference 1, H = 5: suffix sums 7, 14, 21, 20, 19, 18, 17, 16 -> stops (16 < 21 - 5)
    assertThat(Cusum.backwardOnset(x, x.length, 1, 5)).isEqualTo(8);
  }

  @Property(tries = 300)
  void neverSignalsWhenEveryPointIsAtMostTargetPlusAllowance(
      @ForAll @Size(min = 1, max = 200) List<@DoubleRange(min = -1e3, max = 0) @Scale(6) Double> belowBy,
      @ForAll @DoubleRange(min = -100, max = 100) double target,
      @ForAll @DoubleRange(min = 0, max = 5) double allowance,
      @ForAll @DoubleRange(min = 1e-6, max = 10) @Scale(6) double threshold) {
    // Property of the recursion (Page 1954): with x_i - (mu0 + K) <= 0 for all i, C+ stays 0.
    Cusum c = new Cusum(target, allowance, threshold);
    for (double d : belowBy) {
      assertThat(c.offer(target + allowance + d)).isFalse();
      assertThat(c.value()).isZero();
    }
  }

  @Test
  void rejectsBadParametersNamingThem() {
    assertThatThrownBy(() -> new Cusum(0, -1, 5))
        .isInstanceOf(IllegalArgumentException.class)
        .hasMessageContaining("allowance")
        .hasMessageContaining("-1");
    assertThatThrownBy(() -> new Cusum(0, 1, 0))
        .isInstanceOf(IllegalArgumentException.class)
        .hasMessageContaining("threshold");
    assertThatThrownBy(() -> new Cusum(Double.NaN, 1, 1))
        .isInstanceOf(IllegalArgumentException.class)
        .hasMessageContaining("target");
  }
}
