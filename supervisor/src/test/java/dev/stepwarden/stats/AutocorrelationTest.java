package dev.stepwarden.stats;

import static org.assertj.core.api.Assertions.assertThat;
import static org.assertj.core.api.Assertions.assertThatThrownBy;
import static org.assertj.core.api.Assertions.within;

import java.util.Random;
import org.junit.jupiter.api.Test;

class AutocorrelationTest {

  @Test
  void handComputedLinearRamp() {
    // Hand-computed: 1,2,3,4 has deviations -1.5,-0.5,0.5,1.5; c0 = 5,
    // c1 = 0.75 - 0.25 + 0.75 = 1.25, r1 = 0.25.
    assertThat(Autocorrelation.lag1(new double[] {9, 1, 2, 3, 4}, 1, 4))
        .isCloseTo(0.25, within(1e-15));
  }

  @Test
  void alternatingSeriesIsNearMinusOne() {
    // Hand-computed: +1,-1,... of length n has mean 0, c0 = n, c1 = -(n-1): r1 = -(n-1)/n.
    double[] x = new double[10];
    for (int i = 0; i < x.length; i++) {
      x[i] = (i % 2 == 0) ? 1 : -1;
    }
    assertThat(Autocorrelation.lag1(x, 0, 10)).isCloseTo(-0.9, within(1e-15));
  }

  @Test
  void whiteNoiseAveragesMinusOneOverN() {
    // For n independent normal points E[r1] is about -1/n (Moran 1948; value recalled from
    // memory). 20000 seeded series of 20 points: the mean should be near -0.05.
    Random random = new Random(5);
    double[] x = new double[20];
    double sum = 0;
    int series = 20000;
    for (int s = 0; s < series; s++) {
      for (int i = 0; i < x.length; i++) {
        x[i] = random.nextGaussian();
      }
      sum += Autocorrelation.lag1(x, 0, x.length);
    }
    assertThat(sum / series).isCloseTo(-0.05, within(0.01));
  }

  @Test
  void differencesOfWhiteNoiseAreNearMinusOneHalf() {
    // Derived: d_i = e_{i+1} - e_i has Cov(d_i, d_{i+1}) = -sigma^2 and Var(d_i) = 2 sigma^2.
    Random random = new Random(6);
    int n = 40000;
    double[] d = new double[n];
    double previous = random.nextGaussian();
    for (int i = 0; i < n; i++) {
      double e = random.nextGaussian();
      d[i] = e - previous;
      previous = e;
    }
    assertThat(Autocorrelation.lag1(d, 0, n)).isCloseTo(-0.5, within(0.02));
  }

  @Test
  void constantSeriesHasNoAutocorrelation() {
    assertThat(Autocorrelation.lag1(new double[] {2, 2, 2}, 0, 3)).isNaN();
  }

  @Test
  void rejectsTooFewPoints() {
    assertThatThrownBy(() -> Autocorrelation.lag1(new double[] {1, 2}, 1, 2))
        .isInstanceOf(IllegalArgumentException.class);
  }
}
