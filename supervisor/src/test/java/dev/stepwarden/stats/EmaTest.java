package dev.stepwarden.stats;

import static org.assertj.core.api.Assertions.assertThat;
import static org.assertj.core.api.Assertions.assertThatThrownBy;
import static org.assertj.core.api.Assertions.within;

import org.junit.jupiter.api.Test;

class EmaTest {

  @Test
  void constantSeriesGivesTheConstantFromTheFirstPoint() {
    // Kingma & Ba 2015, Adam, s3: the bias correction removes the pull towards m_0 = 0, so a
    // constant input is reproduced from t = 1 on.
    for (double beta : new double[] {0.0, 0.5, 0.9, 0.99, 0.999}) {
      Ema ema = new Ema(beta);
      for (int t = 1; t <= 2000; t++) {
        assertThat(ema.offer(0.7312)).as("beta %s, t %d", beta, t).isEqualTo(0.7312);
      }
    }
  }

  @Test
  void handComputedThreeSteps() {
    // Hand-computed from Kingma & Ba 2015, Algorithm 1, with b = 0.5 and x = 2, 4, 8:
    // m1 = 1,    mhat1 = 1 / 0.5 = 2
    // m2 = 2.5,  mhat2 = 2.5 / 0.75 = 10/3
    // m3 = 5.25, mhat3 = 5.25 / 0.875 = 6
    Ema ema = new Ema(0.5);
    assertThat(ema.offer(2)).isCloseTo(2, within(1e-15));
    assertThat(ema.offer(4)).isCloseTo(10.0 / 3, within(1e-15));
    assertThat(ema.offer(8)).isCloseTo(6, within(1e-15));
    assertThat(ema.count()).isEqualTo(3);
  }

  @Test
  void updateFormAgreesWithTheTextbookFormOverALongNoisySeries() {
    java.util.Random random = new java.util.Random(11);
    double beta = 0.9;
    Ema ema = new Ema(beta);
    double m = 0;
    for (int t = 1; t <= 500; t++) {
      double x = 1 + random.nextGaussian();
      m = beta * m + (1 - beta) * x;
      double textbook = m / (1 - Math.pow(beta, t));
      assertThat(ema.offer(x)).isCloseTo(textbook, within(1e-12));
    }
  }

  @Test
  void matchesTheGainRecomputedOnEveryPointBitForBitAcrossResets() {
    // the gain is taken as 1 - b once 1 - b^t rounds to 1; the plain recurrence is the reference
    java.util.Random random = new java.util.Random(5);
    for (double beta : new double[] {0.0, 0.2, 0.5, 0.9, 0.99, 0.999}) {
      Ema ema = new Ema(beta);
      for (int run = 0; run < 3; run++) {
        double power = 1;
        double value = Double.NaN;
        for (int t = 1; t <= 20_000; t++) {
          double x = 1 + random.nextGaussian();
          power *= beta;
          double gain = (1 - beta) / (1 - power);
          value = t == 1 ? x : value + gain * (x - value);
          assertThat(Double.doubleToRawLongBits(ema.offer(x))).as("beta %s, t %d", beta, t)
              .isEqualTo(Double.doubleToRawLongBits(value));
        }
        ema.reset();
      }
    }
  }

  @Test
  void resetStartsANewAverage() {
    Ema ema = new Ema(0.9);
    ema.offer(100);
    ema.offer(100);
    ema.reset();
    assertThat(ema.value()).isNaN();
    assertThat(ema.offer(3)).isEqualTo(3);
  }

  @Test
  void rejectsBetaOutsideTheUnitInterval() {
    assertThatThrownBy(() -> new Ema(1.0))
        .isInstanceOf(IllegalArgumentException.class)
        .hasMessageContaining("beta")
        .hasMessageContaining("1.0");
    assertThatThrownBy(() -> new Ema(-0.1)).isInstanceOf(IllegalArgumentException.class);
  }
}
