package dev.stepwarden.detectors;

import static org.assertj.core.api.Assertions.assertThat;
import static org.assertj.core.api.Assertions.assertThatThrownBy;
import static org.assertj.core.api.Assertions.within;

import java.util.Optional;
import java.util.Random;
import org.junit.jupiter.api.Test;

class GrowthDetectorTest {

  private static GrowthDetector defaults() {
    return new GrowthDetector(
        "train", GrowthDetector.DEFAULT_WINDOW, GrowthDetector.DEFAULT_ALPHA, 0);
  }

  @Test
  void firesOnASteadyRiseAndEstimatesItsSlope() {
    // Our scenario: flat at 0.5 with 2 % noise, then rising by 0.005 per sample.
    Random random = new Random(4);
    GrowthDetector d = defaults();
    Optional<Evidence> fired = Optional.empty();
    int t = 0;
    for (; t < 2000 && fired.isEmpty(); t++) {
      double clean = t < 1000 ? 0.5 : 0.5 + 0.005 * (t - 999);
      fired = d.offer(t, clean * (1 + 0.02 * random.nextGaussian()));
    }
    assertThat(t - 1).isBetween(1000, 1000 + GrowthDetector.DEFAULT_WINDOW);
    Evidence e = fired.orElseThrow();
    assertThat(e.detector()).isEqualTo("climbs");
    assertThat(e.figures())
        .containsEntry("window", GrowthDetector.DEFAULT_WINDOW)
        .containsKeys("s_statistic", "z", "p_value", "exact", "sen_slope", "first_step", "last_step");
    assertThat((double) e.figures().get("p_value")).isLessThan(GrowthDetector.DEFAULT_ALPHA);
    assertThat((long) e.figures().get("s_statistic")).isPositive();
    assertThat(e.summary()).startsWith("train has risen steadily over the last 30 points");
  }

  @Test
  void smallWindowUsesTheExactDistribution() {
    // Five strictly rising points: S = 10, P(S >= 10) = 1/5! = 0.0083 exactly (Gilbert 1987,
    // Table A18, n = 5, S = 10: 0.008).
    double[] rising = {1, 2, 3, 4, 5};
    GrowthDetector loose = new GrowthDetector(5, 0.01);
    GrowthDetector strict = new GrowthDetector(5, 0.008);
    Optional<Evidence> e = Optional.empty();
    for (int i = 0; i < rising.length; i++) {
      e = loose.offer(i, rising[i]);
      assertThat(strict.offer(i, rising[i])).isEmpty();
    }
    assertThat(e).isPresent();
    assertThat((double) e.get().figures().get("p_value")).isCloseTo(1.0 / 120, within(1e-15));
    assertThat(e.get().figures()).containsEntry("exact", true).containsEntry("s_statistic", 10L);
    assertThat((double) e.get().figures().get("sen_slope")).isEqualTo(1.0);
  }

  @Test
  void staysQuietOnLongFlatAndDescendingNoisySeries() {
    Random random = new Random(5);
    GrowthDetector flat = defaults();
    GrowthDetector falling = defaults();
    int fired = 0;
    for (int t = 0; t < 30_000; t++) {
      double noise = Math.exp(0.1 * random.nextGaussian());
      fired += flat.offer(t, 0.5 * noise).isPresent() ? 1 : 0;
      fired += falling.offer(t, (0.3 + 2 * Math.exp(-t / 4000.0)) * noise).isPresent() ? 1 : 0;
    }
    // Goal: at most one spurious firing per 1000 points (here 60000 points judged).
    assertThat(fired).isLessThanOrEqualTo(60);
  }

  @Test
  void resetEmptiesTheWindowAndNonFiniteValuesAreSkipped() {
    GrowthDetector d = new GrowthDetector(5, 0.01);
    for (int i = 0; i < 4; i++) {
      d.offer(i, i);
    }
    assertThat(d.offer(4, Double.NaN)).isEmpty();
    assertThat(d.offer(5, 4)).isPresent();
    d.reset();
    for (int i = 0; i < 4; i++) {
      assertThat(d.offer(10 + i, 10 + i)).isEmpty();
    }
  }

  @Test
  void rejectsBadParametersNamingThem() {
    assertThatThrownBy(() -> new GrowthDetector(2, 0.01))
        .isInstanceOf(IllegalArgumentException.class)
        .hasMessageContaining("over")
        .hasMessageContaining("2");
    assertThatThrownBy(() -> new GrowthDetector(30, 0))
        .isInstanceOf(IllegalArgumentException.class)
        .hasMessageContaining("p_below");
  }
}
