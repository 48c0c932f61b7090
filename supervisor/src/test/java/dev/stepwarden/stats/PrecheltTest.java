package dev.stepwarden.stats;

import static org.assertj.core.api.Assertions.assertThat;
import static org.assertj.core.api.Assertions.assertThatThrownBy;
import static org.assertj.core.api.Assertions.within;

import org.junit.jupiter.api.Test;

class PrecheltTest {

  @Test
  void generalizationLossIsPercentAboveBest() {
    // Prechelt 1998, s2.2, GL(t) = 100 (E_va(t) / E_opt(t) - 1); hand-computed 100 (0.55/0.5 - 1).
    assertThat(Prechelt.generalizationLoss(0.55, 0.5)).isCloseTo(10, within(1e-12));
    assertThat(Prechelt.generalizationLoss(0.5, 0.5)).isZero();
  }

  @Test
  void trainingProgressOnHandComputedStrip() {
    // Prechelt 1998, s2.2, P_k(t) = 1000 (sum E_tr / (k min E_tr) - 1).
    // Hand-computed strip 1.0, 0.9, 0.85, 0.82, 0.8: sum 4.37, k min = 4.0 -> 1000 * 0.0925.
    double[] strip = {7, 1.0, 0.9, 0.85, 0.82, 0.8};
    assertThat(Prechelt.trainingProgress(strip, 1, 5)).isCloseTo(92.5, within(1e-9));
    // A stalled strip makes no progress.
    assertThat(Prechelt.trainingProgress(new double[] {0.3, 0.3, 0.3}, 0, 3)).isZero();
  }

  @Test
  void progressQuotientDividesTheTwo() {
    // Prechelt 1998, s2.2, PQ = GL / P_k; hand-computed 10 / 92.5.
    assertThat(Prechelt.progressQuotient(10, 92.5)).isCloseTo(10 / 92.5, within(1e-15));
    assertThat(Prechelt.progressQuotient(10, 0)).isInfinite();
    assertThat(Prechelt.progressQuotient(0, 0)).isZero();
  }

  @Test
  void rejectsNonPositiveErrors() {
    assertThatThrownBy(() -> Prechelt.generalizationLoss(1, 0))
        .isInstanceOf(IllegalArgumentException.class)
        .hasMessageContaining("positive");
    assertThatThrownBy(() -> Prechelt.trainingProgress(new double[] {1, 0}, 0, 2))
        .isInstanceOf(IllegalArgumentException.class)
        .hasMessageContaining("positive");
  }
}
