package dev.stepwarden.stats;

import static org.assertj.core.api.Assertions.assertThat;
import static org.assertj.core.api.Assertions.assertThatThrownBy;
import static org.assertj.core.api.Assertions.within;

import org.junit.jupiter.api.Test;

class SensSlopeTest {

  @Test
  void medianOfPairwiseSlopesOnHandComputedSeries() {
    // Hand-computed: 1, 3, 2, 5 at t = 0..3 has slopes 2, 0.5, 4/3, -1, 1, 3;
    // sorted -1, 0.5, 1, 4/3, 2, 3; the median of six is (1 + 4/3) / 2 = 7/6 (Sen 1968).
    assertThat(SensSlope.slope(new double[] {1, 3, 2, 5}, 4)).isCloseTo(7.0 / 6, within(1e-15));
    // Hand-computed, odd number of pairs: 4, 1, 0 has slopes -3, -2, -1; median -2.
    assertThat(SensSlope.slope(new double[] {4, 1, 0}, 3)).isCloseTo(-2, within(1e-15));
  }

  @Test
  void ignoresTwoWildPointsOnAStraightLine() {
    // Sen 1968: the estimator resists outliers. On y = 3 - 0.25 t with two wild points among ten,
    // 28 of the 45 pairwise slopes are exactly -0.25 and they cover the middle ranks.
    double[] y = new double[10];
    for (int t = 0; t < y.length; t++) {
      y[t] = 3 - 0.25 * t;
    }
    y[3] = 40;
    y[7] = -25;
    assertThat(SensSlope.slope(y, y.length)).isEqualTo(-0.25);
  }

  @Test
  void usesOnlyTheFirstNValuesWithAGivenScratch() {
    double[] y = {0, 2, 4, 6, 1000, -1000};
    assertThat(SensSlope.slope(y, 4, new double[SensSlope.pairs(4)])).isEqualTo(2.0);
  }

  @Test
  void rejectsFewerThanTwoPoints() {
    assertThatThrownBy(() -> SensSlope.slope(new double[] {1}, 1))
        .isInstanceOf(IllegalArgumentException.class)
        .hasMessageContaining("n = 1");
  }
}
