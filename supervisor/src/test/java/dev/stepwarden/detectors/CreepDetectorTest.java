package dev.stepwarden.detectors;

import static org.assertj.core.api.Assertions.assertThat;
import static org.assertj.core.api.Assertions.assertThatThrownBy;
import static org.assertj.core.api.Assertions.within;

import java.util.Optional;
import java.util.Random;
import org.junit.jupiter.api.Test;

class CreepDetectorTest {

  private static CreepDetector defaults() {
    return new CreepDetector(
        "validation",
        CreepDetector.DEFAULT_OVER,
        CreepDetector.DEFAULT_ALPHA,
        CreepDetector.DEFAULT_MAX_REL_SLOPE_PER_EVAL);
  }

  @Test
  void firesOnASteadySlowFallOnceTheWindowIsFull() {
    // 0.1 % per evaluation, no noise: eight strictly falling points, exact p = 1/8! (S = -28).
    CreepDetector d = defaults();
    Optional<Evidence> fired = Optional.empty();
    for (int i = 0; i < 8; i++) {
      fired = d.offer(100L * i, 0.6 * Math.pow(0.999, i));
      if (i < 7) {
        assertThat(fired).isEmpty();
      }
    }
    Evidence e = fired.orElseThrow();
    assertThat(e.detector()).isEqualTo("creeps");
    assertThat(e.figures()).containsEntry("window", 8).containsEntry("s_statistic", -28L);
    assertThat((double) e.figures().get("p_value")).isCloseTo(1.0 / 40320, within(1e-15));
    assertThat((double) e.figures().get("relative_slope")).isCloseTo(0.001, within(0.00002));
    assertThat((double) e.figures().get("sen_slope")).isNegative();
    assertThat(e.summary()).startsWith("validation falls steadily but slowly: 0.1 % of its level");
  }

  @Test
  void staysQuietWhenTheFallIsFast() {
    CreepDetector d = defaults();
    for (int i = 0; i < 100; i++) {
      assertThat(d.offer(i, 0.6 * Math.pow(0.99, i))).isEmpty();
    }
  }

  @Test
  void staysQuietOnRisingSeries() {
    CreepDetector d = defaults();
    for (int i = 0; i < 100; i++) {
      assertThat(d.offer(i, 0.6 * Math.pow(1.0005, i))).isEmpty();
    }
  }

  @Test
  void rarelyFiresOnFlatNoise() {
    Random random = new Random(13);
    CreepDetector d = defaults();
    int fired = 0;
    for (int i = 0; i < 20_000; i++) {
      if (d.offer(i, 0.4 * Math.exp(0.001 * random.nextGaussian())).isPresent()) {
        fired++;
        d.reset();
      }
    }
    assertThat(fired).isLessThanOrEqualTo(20); // goal: <= 1 per 1000 evaluations
  }

  @Test
  void rejectsBadParametersNamingThem() {
    assertThatThrownBy(() -> new CreepDetector(2, 0.001, 0.002))
        .isInstanceOf(IllegalArgumentException.class)
        .hasMessageContaining("'over'");
    assertThatThrownBy(() -> new CreepDetector(8, 1.5, 0.002))
        .isInstanceOf(IllegalArgumentException.class)
        .hasMessageContaining("alpha")
        .hasMessageContaining("1.5");
    assertThatThrownBy(() -> new CreepDetector(8, 0.001, 0))
        .isInstanceOf(IllegalArgumentException.class)
        .hasMessageContaining("maxRelSlopePerEval");
  }
}
