package dev.stepwarden.stats;

import static org.assertj.core.api.Assertions.assertThat;
import static org.assertj.core.api.Assertions.within;

import org.junit.jupiter.api.Test;

/**
 * The range-test reading (Smith 2017, s3.3: the usable range runs from where the loss starts to
 * fall to where it turns ragged or rises) on synthetic loss-vs-rate curves of our own.
 */
class RangeTestTest {
  /**
   * Our own curve: flat at 1.1 below 1e-3, falling linearly in log10(rate) to 0.3 at rate 0.3,
   * then rising steeply, with a small deterministic ripple standing in for mini-batch noise.
   */
  static double curve(double rate) {
    double x = Math.log10(rate);
    double base = x < -3 ? 1.1 : x <= Math.log10(0.3) ? 1.1 - 0.8 * (x + 3) / (Math.log10(0.3) + 3)
        : 0.3 + 3.0 * (x - Math.log10(0.3));
    return base * (1 + 0.005 * Math.sin(37 * x));
  }

  @Test
  void readsTheRangeFromWhereTheLossFallsToWhereItRises() {
    double[] rates = RangeTest.ramp(1e-5, 10, 49);
    double[] losses = new double[rates.length];
    for (int i = 0; i < rates.length; i++) {
      losses[i] = curve(rates[i]);
    }
    RangeTest.Reading r = RangeTest.read(rates, losses, 0.3);
    assertThat(r.found()).isTrue();
    // The fall starts at 1e-3; the smoothing lags by a level or two (factor 10^(1/8) each).
    assertThat(Math.log10(r.lower())).isBetween(-3.0, -2.5);
    // The true minimum is at 0.3; the moving average lags the turn by at most two levels.
    assertThat(Math.log10(r.upper())).isBetween(Math.log10(0.3) - 0.01, Math.log10(0.3) + 0.26);
    assertThat(r.pick()).isCloseTo(0.3 * r.upper(), within(1e-12));
  }

  @Test
  void rampIsGeometricAndEndsExactlyAtBothRates() {
    double[] r = RangeTest.ramp(1e-4, 1, 5);
    assertThat(r).containsExactly(new double[] {1e-4, 1e-3, 1e-2, 1e-1, 1}, within(1e-15));
  }

  @Test
  void stopsReadingAtANonFiniteLoss() {
    double[] rates = RangeTest.ramp(1e-3, 1, 4);
    RangeTest.Reading r = RangeTest.read(rates, new double[] {1.0, 0.8, Double.NaN, 0.1}, 0.5);
    assertThat(r.upper()).isEqualTo(rates[1]);
    assertThat(r.note()).contains("ran away");
  }

  @Test
  void findsNoRangeWhenTheLossNeverFalls() {
    double[] rates = RangeTest.ramp(1e-3, 1, 4);
    RangeTest.Reading r = RangeTest.read(rates, new double[] {1.0, 1.0, 1.001, 0.999}, 0.3);
    assertThat(r.found()).isFalse();
    assertThat(r.note()).contains("never fell");
  }

  @Test
  void neverPicksBelowTheLowerEnd() {
    double[] rates = RangeTest.ramp(1e-3, 1e-2, 4);
    RangeTest.Reading r = RangeTest.read(rates, new double[] {1.0, 0.5, 0.6, 0.9}, 1e-3);
    assertThat(r.pick()).isEqualTo(r.lower());
  }
}
