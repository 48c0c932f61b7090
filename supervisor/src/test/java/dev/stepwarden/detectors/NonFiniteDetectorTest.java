package dev.stepwarden.detectors;

import static org.assertj.core.api.Assertions.assertThat;
import static org.assertj.core.api.Assertions.assertThatThrownBy;

import org.junit.jupiter.api.Test;

class NonFiniteDetectorTest {

  @Test
  void firesOnNanAndBothInfinitiesWithStepAndValue() {
    NonFiniteDetector d = new NonFiniteDetector("train");
    Evidence nan = d.offer(4100, Double.NaN).orElseThrow();
    assertThat(nan.detector()).isEqualTo("breaks");
    assertThat(nan.figures()).containsEntry("step", 4100L).containsEntry("value", "NaN");
    assertThat(nan.summary()).isEqualTo("train is NaN at step 4100.");
    assertThat(d.offer(4200, Double.POSITIVE_INFINITY).orElseThrow().figures())
        .containsEntry("value", "Infinity");
    assertThat(d.offer(4300, Double.NEGATIVE_INFINITY).orElseThrow().summary())
        .isEqualTo("train is -Infinity at step 4300.");
  }

  @Test
  void staysQuietOnFiniteValuesHoweverExtreme() {
    NonFiniteDetector d = new NonFiniteDetector();
    for (double v : new double[] {0, -0.0, Double.MIN_VALUE, Double.MAX_VALUE, -Double.MAX_VALUE}) {
      assertThat(d.offer(1, v)).isEmpty();
    }
  }

  @Test
  void rejectsBlankSeriesName() {
    assertThatThrownBy(() -> new NonFiniteDetector(" "))
        .isInstanceOf(IllegalArgumentException.class)
        .hasMessageContaining("series");
  }
}
