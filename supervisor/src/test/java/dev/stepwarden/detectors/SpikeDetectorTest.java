package dev.stepwarden.detectors;

import static org.assertj.core.api.Assertions.assertThat;
import static org.assertj.core.api.Assertions.assertThatThrownBy;

import java.util.Optional;
import java.util.Random;
import org.junit.jupiter.api.Test;

class SpikeDetectorTest {

  /** Our own scenario: a descending loss with 5 % multiplicative noise. */
  private static double[] descendingLoss(int n, long seed) {
    Random random = new Random(seed);
    double[] x = new double[n];
    for (int t = 0; t < n; t++) {
      x[t] = (0.3 + 2.0 * Math.exp(-t / 500.0)) * Math.exp(0.05 * random.nextGaussian());
    }
    return x;
  }

  private static SpikeDetector defaults() {
    return new SpikeDetector(
        "train", SpikeDetector.DEFAULT_K, SpikeDetector.DEFAULT_SAMPLES, SpikeDetector.DEFAULT_BETA);
  }

  @Test
  void firesOnTheThirdSampleOfAPersistentTenfoldJump() {
    double[] x = descendingLoss(3000, 1);
    int onset = 2000;
    for (int t = onset; t < x.length; t++) {
      x[t] *= 10;
    }
    SpikeDetector d = defaults();
    Optional<Evidence> fired = Optional.empty();
    int at = -1;
    for (int t = 0; t < x.length && fired.isEmpty(); t++) {
      fired = d.offer(t * 10L, x[t]);
      at = t;
    }
    assertThat(at).isEqualTo(onset + 2);
    Evidence e = fired.orElseThrow();
    assertThat(e.detector()).isEqualTo("rises");
    assertThat(e.figures())
        .containsKeys("smoothed", "value", "best", "best_step", "ratio", "limit_ratio")
        .containsEntry("samples", 3)
        .containsEntry("since_step", onset * 10L);
    assertThat((double) e.figures().get("ratio")).isGreaterThan(3);
    assertThat((long) e.figures().get("best_step")).isLessThan(onset * 10L);
    assertThat(e.summary()).startsWith("train (smoothed) is ").contains("for 3 samples in a row");
  }

  @Test
  void singleVeryBadBatchesNeverFireItEvenOnANoisySeries() {
    // One batch at 20 x the loss every 500 samples, on 20 % noise: the EMA stays high for a few
    // samples by memory alone, which must not count as a run.
    Random random = new Random(2);
    SpikeDetector d = defaults();
    for (int t = 0; t < 20_000; t++) {
      double x = (0.3 + 2.0 * Math.exp(-t / 2500.0)) * Math.exp(0.2 * random.nextGaussian());
      if (t % 500 == 250) {
        x *= 20;
      }
      assertThat(d.offer(t, x)).as("step %d", t).isEmpty();
    }
  }

  @Test
  void staysQuietOnALongDescendingNoisySeries() {
    SpikeDetector d = defaults();
    double[] x = descendingLoss(50_000, 3);
    for (int t = 0; t < x.length; t++) {
      assertThat(d.offer(t, x[t])).isEmpty();
    }
  }

  @Test
  void skipsNonFiniteValuesWithoutPoisoningTheAverage() {
    SpikeDetector d = new SpikeDetector(3, 1, 0.5);
    d.offer(0, 1.0);
    assertThat(d.offer(1, Double.NaN)).isEmpty();
    assertThat(d.offer(2, Double.POSITIVE_INFINITY)).isEmpty();
    assertThat(d.offer(3, 1.0)).isEmpty();
    // 1 -> smoothed (1*0.5 + 10*0.5 bias-corrected over 3 points) is above 3 x 1: fires.
    assertThat(d.offer(4, 10.0)).isPresent();
  }

  @Test
  void resetForgetsTheBestSoThatANewRegimeIsJudgedOnItsOwn() {
    SpikeDetector d = new SpikeDetector(3, 1, 0.0);
    d.offer(0, 1.0);
    d.reset();
    assertThat(d.offer(1, 5.0)).isEmpty(); // 5 is the new best, not 5 x the old one
    assertThat(d.offer(2, 16.0)).isPresent();
  }

  @Test
  void neverFiresOnANonPositiveSeries() {
    SpikeDetector d = new SpikeDetector(3, 1, 0.0);
    d.offer(0, -2.0);
    assertThat(d.offer(1, 100.0)).isEmpty();
  }

  @Test
  void rejectsBadParametersNamingThem() {
    assertThatThrownBy(() -> new SpikeDetector(1.0, 3, 0.5))
        .isInstanceOf(IllegalArgumentException.class)
        .hasMessageContaining("k")
        .hasMessageContaining("1.0");
    assertThatThrownBy(() -> new SpikeDetector(3, 0, 0.5))
        .isInstanceOf(IllegalArgumentException.class)
        .hasMessageContaining("samples");
    assertThatThrownBy(() -> new SpikeDetector(3, 3, 1.0))
        .isInstanceOf(IllegalArgumentException.class)
        .hasMessageContaining("beta");
  }
}
