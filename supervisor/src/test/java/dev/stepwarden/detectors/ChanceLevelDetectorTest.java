package dev.stepwarden.detectors;

import static org.assertj.core.api.Assertions.assertThat;
import static org.assertj.core.api.Assertions.assertThatThrownBy;
import static org.assertj.core.api.Assertions.within;

import java.util.Optional;
import java.util.Random;
import org.junit.jupiter.api.Test;

class ChanceLevelDetectorTest {

  @Test
  void firesAtTheDeadlineWhenTheLossHoversAtLnOfTheClassCount() {
    // Cross-entropy of the uniform prediction over C classes is ln C (= 2.3026 for 10).
    Random random = new Random(21);
    ChanceLevelDetector d = new ChanceLevelDetector(10, 0.05, 1000);
    Optional<Evidence> first = Optional.empty();
    long firstStep = -1;
    for (long step = 0; step <= 2000 && first.isEmpty(); step += 10) {
      first = d.offer(step, Math.log(10) + 0.02 * random.nextGaussian());
      firstStep = step;
    }
    assertThat(firstStep).isEqualTo(1000);
    Evidence e = first.orElseThrow();
    assertThat(e.detector()).isEqualTo("stuck_at_chance");
    assertThat((double) e.figures().get("chance_level")).isCloseTo(2.302585, within(1e-6));
    assertThat(e.figures())
        .containsEntry("classes", 10)
        .containsEntry("by_step", 1000L)
        .containsKeys("smoothed", "best_smoothed", "tolerance", "step");
    assertThat(e.summary()).contains("chance level ln 10 = 2.303").contains("by step 1000");
  }

  @Test
  void staysQuietOnceTheLossHasLeftChanceLevel() {
    ChanceLevelDetector d = new ChanceLevelDetector(10, 0.05, 1000);
    for (long step = 0; step <= 5000; step += 10) {
      double loss = 0.3 + 2.0 * Math.exp(-step / 300.0);
      assertThat(d.offer(step, loss)).isEmpty();
    }
  }

  @Test
  void aLossFarAboveChanceAlsoCountsAsNotLearning() {
    ChanceLevelDetector d = new ChanceLevelDetector(2, 0.1, 10);
    assertThat(d.offer(5, 4.0)).isEmpty();
    assertThat(d.offer(10, 4.0)).isPresent();
  }

  @Test
  void rejectsBadParametersNamingThem() {
    assertThatThrownBy(() -> new ChanceLevelDetector(1, 0.05, 10))
        .isInstanceOf(IllegalArgumentException.class)
        .hasMessageContaining("classes");
    assertThatThrownBy(() -> new ChanceLevelDetector(2, 0.7, 10))
        .isInstanceOf(IllegalArgumentException.class)
        .hasMessageContaining("tolerance")
        .hasMessageContaining("0.7");
    assertThatThrownBy(() -> new ChanceLevelDetector(2, 0.1, -1))
        .isInstanceOf(IllegalArgumentException.class)
        .hasMessageContaining("byStep");
  }
}
