package dev.stepwarden.controller;

import static org.junit.jupiter.api.Assertions.assertEquals;

import dev.stepwarden.controller.EarlyPhase.Kind;
import org.junit.jupiter.api.Test;

/**
 * First-epoch training losses recorded from real PyTorch runs of the control-quality benchmark
 * (task digits-mlp: sklearn's digits data, 10 classes, seed 1; 34 steps), one per starting rate.
 * Chance level for 10 balanced classes: ln 10 = 2.302585 (natural-log table).
 */
class EarlyPhaseTest {
  static final double LN10 = 2.302585;
  static final double[] RATE_3 = {2.3161, 2.4294, 2.276, 2.2546, 2.2978, 3.3626, 9.6213, 10.7388,
      2.775, 2.329, 2.3806, 2.4866, 2.3389, 2.3424, 2.1961, 2.1583, 1.994, 2.0578, 12.784, 6.3875,
      2.4847, 2.6924, 2.6394, 2.4126, 2.3348, 2.5139, 2.3374, 2.29, 2.4312, 2.3572, 2.2646,
      2.4452, 2.3166, 2.3896};
  static final double[] RATE_0_1 = {2.3161, 2.2422, 2.294, 2.2955, 2.2577, 2.3187, 2.2706, 2.2501,
      2.2799, 2.286, 2.2421, 2.2491, 2.2187, 2.2192, 2.2279, 2.2302, 2.1984, 2.2039, 2.1864,
      2.1813, 2.1693, 2.1888, 2.1954, 2.1237, 2.1277, 2.1471, 2.1369, 2.0973, 2.1292, 2.0991,
      2.0276, 2.1312, 2.0775, 2.086};
  static final double[] RATE_0_001 = {2.3161, 2.2459, 2.3066, 2.3125, 2.2834, 2.3427, 2.293,
      2.2935, 2.3351, 2.3366, 2.3037, 2.326, 2.3048, 2.3069, 2.3221, 2.306, 2.2813, 2.3151,
      2.2806, 2.2861, 2.2749, 2.3171, 2.3387, 2.2405, 2.2696, 2.3089, 2.3142, 2.3156, 2.3177,
      2.2918, 2.3163, 2.2975, 2.3508, 2.2599};

  @Test
  void aRateFarTooHighLeavesTheNetworkDeadAtChanceAfterExcursions() {
    assertEquals(Kind.DEAD, EarlyPhase.read(RATE_3, LN10).kind());
  }

  @Test
  void aGoodRateIsAlive() {
    assertEquals(Kind.ALIVE, EarlyPhase.read(RATE_0_1, LN10).kind());
  }

  @Test
  void aRateFarTooLowIsSlowNotDeadSoItIsNeverLowered() {
    EarlyPhase.Reading r = EarlyPhase.read(RATE_0_001, LN10);
    assertEquals(Kind.SLOW, r.kind(), r.reason());
  }

  @Test
  void aNonFiniteLossOrALossAboveItsStartIsDeadEvenWithoutAChanceLevel() {
    assertEquals(Kind.DEAD, EarlyPhase.read(new double[] {1, 0.9, Double.NaN, 0.8}, Double.NaN)
        .kind());
    assertEquals(Kind.DEAD, EarlyPhase.read(new double[] {1, 1, 1.3, 1.4}, Double.NaN).kind());
    assertEquals(Kind.ALIVE, EarlyPhase.read(new double[] {1, 0.9, 0.8, 0.7}, Double.NaN)
        .kind());
  }
}
