package dev.stepwarden.detectors;

import static org.assertj.core.api.Assertions.assertThat;
import static org.assertj.core.api.Assertions.assertThatThrownBy;
import static org.assertj.core.api.Assertions.within;

import java.util.Optional;
import java.util.Random;
import org.junit.jupiter.api.Test;

class PlateauDetectorTest {

  private static PlateauDetector defaults() {
    return new PlateauDetector(
        "validation",
        PlateauDetector.DEFAULT_OVER,
        PlateauDetector.DEFAULT_MIN_REL_GAIN,
        PlateauDetector.DEFAULT_ALPHA);
  }

  @Test
  void firesFiveEvaluationsAfterTheLastImprovement() {
    // Hand-computed: best 0.7 at the 4th evaluation, then five evaluations whose best (0.699)
    // improves on it by 0.14 % only; their Mann-Kendall S is 0 (-2 +3 -2 +1), p(down) = 0.58.
    double[] v = {1.0, 0.9, 0.8, 0.7, 0.702, 0.699, 0.703, 0.700, 0.701};
    PlateauDetector d = defaults();
    Optional<Evidence> fired = Optional.empty();
    for (int i = 0; i < v.length; i++) {
      fired = d.offer(1000L * (i + 1), v[i]);
      if (i < v.length - 1) {
        assertThat(fired).as("evaluation %d", i).isEmpty();
      }
    }
    Evidence e = fired.orElseThrow();
    assertThat(e.detector()).isEqualTo("flattens");
    assertThat(e.figures())
        .containsEntry("window", 5)
        .containsEntry("best", 0.699)
        .containsEntry("best_step", 6000L)
        .containsEntry("reference_best", 0.7)
        .containsEntry("window_best", 0.699)
        .containsEntry("s_statistic", 0L)
        .containsEntry("latest", 0.701)
        .containsEntry("latest_step", 9000L);
    assertThat((double) e.figures().get("relative_gain")).isCloseTo(0.001 / 0.7, within(1e-12));
    // Exact no-tie distribution for n = 5: P(S <= 0) = 1/2 + P(S = 0)/2 = 0.5 + 22/240.
    assertThat((double) e.figures().get("p_value")).isCloseTo(0.5 + 11.0 / 120, within(1e-12));
    assertThat(e.summary())
        .isEqualTo(
            "best validation 0.7 (step 4000) has not improved by 0.5 % in 5 evaluations (best"
                + " of those 0.699, gain 0.143 %, latest 0.701); trend test p = 0.59.");
  }

  @Test
  void aSingleNoisyRiseNeverFiresIt() {
    // Our scenario: validation improving 0.3 % per evaluation with 0.1 % noise; one evaluation
    // jumps 10 % up, placed in turn at every position of a 60-evaluation run.
    for (int rise = 0; rise < 60; rise++) {
      Random random = new Random(100 + rise);
      PlateauDetector d = defaults();
      for (int i = 0; i < 60; i++) {
        double v = 0.8 * Math.pow(0.997, i) * (1 + 0.001 * random.nextGaussian());
        if (i == rise) {
          v *= 1.10;
        }
        assertThat(d.offer(i, v)).as("rise at %d, evaluation %d", rise, i).isEmpty();
      }
    }
  }

  @Test
  void aSlowButSignificantFallIsNotAPlateau() {
    // 0.05 % per evaluation: 0.25 % over five, below the gain, yet strictly monotone, so the
    // trend test (exact, p = 1/120) calls it a trend: the creep detector's case, not this one.
    PlateauDetector d = defaults();
    for (int i = 0; i < 40; i++) {
      assertThat(d.offer(i, 0.6 * Math.pow(0.9995, i))).isEmpty();
    }
    CreepDetector creep = new CreepDetector(8, 0.001, 0.002);
    boolean crept = false;
    for (int i = 0; i < 40; i++) {
      crept |= creep.offer(i, 0.6 * Math.pow(0.9995, i)).isPresent();
    }
    assertThat(crept).isTrue();
  }

  @Test
  void needsOneEvaluationBeforeTheWindow() {
    PlateauDetector d = new PlateauDetector(3, 0.005, 0.2);
    assertThat(d.offer(1, 0.5)).isEmpty();
    assertThat(d.offer(2, 0.5)).isEmpty();
    assertThat(d.offer(3, 0.5)).isEmpty();
    assertThat(d.offer(4, 0.5)).isPresent(); // ties: Var(S) = 0, no trend evidence at all
    d.reset();
    assertThat(d.offer(5, 0.5)).isEmpty();
    assertThat(d.offer(6, Double.NaN)).isEmpty();
    assertThat(d.offer(7, 0.5)).isEmpty();
    assertThat(d.offer(8, 0.5)).isEmpty();
    assertThat(d.offer(9, 0.5)).isPresent();
  }

  @Test
  void firesSoonAfterARealPlateauOnNoisyValidation() {
    // Our scenario: descent, then flat from evaluation 60 with 0.2 % noise. Visible (five
    // evaluations without improvement) at 65; the goal is to fire within 3 more.
    Random random = new Random(12);
    PlateauDetector d = defaults();
    int firedAt = -1;
    for (int i = 0; i < 120 && firedAt < 0; i++) {
      double clean = 0.35 + 1.9 * Math.exp(-Math.min(i, 60) / 40.0);
      if (d.offer(i, clean * Math.exp(0.002 * random.nextGaussian())).isPresent()) {
        firedAt = i;
      }
    }
    assertThat(firedAt).isBetween(61, 65 + 3);
  }

  @Test
  void rejectsBadParametersNamingThem() {
    assertThatThrownBy(() -> new PlateauDetector(1, 0.005, 0.2))
        .isInstanceOf(IllegalArgumentException.class)
        .hasMessageContaining("'over'")
        .hasMessageContaining("1");
    assertThatThrownBy(() -> new PlateauDetector(5, 1.5, 0.2))
        .isInstanceOf(IllegalArgumentException.class)
        .hasMessageContaining("minRelGain");
    assertThatThrownBy(() -> new PlateauDetector(5, 0.005, 1))
        .isInstanceOf(IllegalArgumentException.class)
        .hasMessageContaining("alpha");
  }
}
