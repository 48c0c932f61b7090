package dev.stepwarden.detectors;

import static org.assertj.core.api.Assertions.assertThat;
import static org.assertj.core.api.Assertions.assertThatThrownBy;
import static org.assertj.core.api.Assertions.within;

import java.util.Optional;
import org.junit.jupiter.api.Test;

class OverfitDetectorTest {

  @Test
  void glFiresOnTheFirstEvaluationMoreThanTheThresholdAboveTheBest() {
    // Prechelt 1998, s2.2, GL_5; hand-computed: best 0.7, then 0.72 (GL 2.86), 0.74 (GL 5.71).
    OverfitDetector d = new OverfitDetector(OverfitDetector.Kind.GL, 5, 5);
    double[] v = {1.0, 0.8, 0.7, 0.72, 0.74};
    Optional<Evidence> e = Optional.empty();
    for (int i = 0; i < v.length; i++) {
      e = d.offer(100L * i, v[i]);
      if (i < 4) {
        assertThat(e).isEmpty();
      }
    }
    Evidence fired = e.orElseThrow();
    assertThat(fired.detector()).isEqualTo("overfits");
    assertThat(fired.figures())
        .containsEntry("kind", "GL")
        .containsEntry("evaluation", 5L)
        .containsEntry("best", 0.7)
        .containsEntry("best_step", 200L)
        .containsEntry("limit", 5.0);
    assertThat((double) fired.figures().get("generalization_loss"))
        .isCloseTo(100 * (0.74 / 0.7 - 1), within(1e-12));
    assertThat(fired.summary())
        .isEqualTo(
            "validation 0.74 at step 400 is 5.714 % above its best 0.7 of step 200:"
                + " generalization loss 5.714 > 5.");
  }

  @Test
  void pqUsesTheMeanTrainingValueOfEachEvaluationAndJudgesAtStripEnds() {
    // Hand-computed: per-evaluation training errors 1.0, 0.9, 0.85, 0.82, 0.8 (each the mean of
    // two logged values +-0.1 around it) give P_5 = 92.5; validation 0.5, 0.45, 0.44, 0.46, 0.484
    // gives GL = 100 (0.484/0.44 - 1) = 10 at the strip end, PQ = 10/92.5 = 0.108
    // (Prechelt 1998, s2.2).
    double[] train = {1.0, 0.9, 0.85, 0.82, 0.8};
    double[] validation = {0.5, 0.45, 0.44, 0.46, 0.484};
    OverfitDetector fires = new OverfitDetector(OverfitDetector.Kind.PQ, 0.1, 5);
    OverfitDetector holds = new OverfitDetector(OverfitDetector.Kind.PQ, 0.11, 5);
    Optional<Evidence> e = Optional.empty();
    for (int i = 0; i < 5; i++) {
      for (OverfitDetector d : new OverfitDetector[] {fires, holds}) {
        d.offerTrain(10L * i, train[i] - 0.1);
        d.offerTrain(10L * i + 5, train[i] + 0.1);
      }
      e = fires.offer(10L * i + 9, validation[i]);
      assertThat(holds.offer(10L * i + 9, validation[i])).isEmpty();
      if (i < 4) {
        assertThat(e).isEmpty();
      }
    }
    Evidence fired = e.orElseThrow();
    assertThat((double) fired.figures().get("training_progress")).isCloseTo(92.5, within(1e-9));
    assertThat((double) fired.figures().get("progress_quotient"))
        .isCloseTo(10 / 92.5, within(1e-9));
    assertThat((double) fired.figures().get("generalization_loss")).isCloseTo(10, within(1e-9));
  }

  @Test
  void pqNeedsAFullStripOfTrainingValues() {
    OverfitDetector d = new OverfitDetector(OverfitDetector.Kind.PQ, 0.01, 2);
    assertThat(d.offer(1, 0.5)).isEmpty();
    assertThat(d.offer(2, 0.9)).isEmpty(); // strip end, but no training values at all
    d.offerTrain(3, 1.0);
    assertThat(d.offer(4, 0.9)).isEmpty();
    assertThat(d.offerPair(5, 0.9, 0.9)).isPresent(); // training errors 1.0, 0.9: P = 55.6
  }

  @Test
  void upCountsSuccessiveRisesAtStripEndsOnly() {
    // Prechelt 1998, s2.2, UP_2 with strips of 2; hand-computed: strip ends (evaluations 2, 4, 6)
    // are 0.5, 0.55, 0.6: rises at 4 and 6, so it fires at 6. Mid-strip values do not count.
    OverfitDetector d = new OverfitDetector(OverfitDetector.Kind.UP, 2, 2);
    double[] v = {0.4, 0.5, 0.1, 0.55, 0.9, 0.6};
    for (int i = 0; i < 5; i++) {
      assertThat(d.offer(i, v[i])).as("evaluation %d", i + 1).isEmpty();
    }
    Evidence e = d.offer(5, v[5]).orElseThrow();
    assertThat(e.figures())
        .containsEntry("kind", "UP")
        .containsEntry("successive_rises", 2)
        .containsEntry("previous_strip_end", 0.55);
    // A fall at a strip end starts the count again.
    assertThat(d.offer(6, 0.3)).isEmpty();
    assertThat(d.offer(7, 0.2)).isEmpty();
  }

  @Test
  void resetForgetsBestAndStrips() {
    OverfitDetector d = new OverfitDetector(OverfitDetector.Kind.GL, 5, 5);
    d.offer(1, 0.5);
    d.reset();
    assertThat(d.offer(2, 0.9)).isEmpty(); // 0.9 is the new best
  }

  @Test
  void skipsNonFiniteAndNonPositiveValues() {
    OverfitDetector d = new OverfitDetector(OverfitDetector.Kind.GL, 5, 5);
    d.offer(1, 0.5);
    assertThat(d.offer(2, Double.NaN)).isEmpty();
    assertThat(d.offer(3, 0)).isEmpty();
    assertThat(d.offer(4, 0.6)).isPresent();
  }

  @Test
  void rejectsBadParametersNamingThem() {
    assertThatThrownBy(() -> new OverfitDetector(OverfitDetector.Kind.UP, 2.5, 5))
        .isInstanceOf(IllegalArgumentException.class)
        .hasMessageContaining("whole number")
        .hasMessageContaining("2.5");
    assertThatThrownBy(() -> new OverfitDetector(OverfitDetector.Kind.GL, 5, 1))
        .isInstanceOf(IllegalArgumentException.class)
        .hasMessageContaining("strip");
    assertThatThrownBy(() -> new OverfitDetector(OverfitDetector.Kind.GL, -5, 5))
        .isInstanceOf(IllegalArgumentException.class)
        .hasMessageContaining("above");
    assertThatThrownBy(() -> new OverfitDetector(null, 5, 5))
        .isInstanceOf(IllegalArgumentException.class)
        .hasMessageContaining("kind");
  }
}
