package dev.stepwarden.detectors;

import static org.assertj.core.api.Assertions.assertThat;
import static org.assertj.core.api.Assertions.assertThatThrownBy;

import java.util.Random;
import org.junit.jupiter.api.Test;

class OnsetLocatorTest {

  private static OnsetLocator defaults() {
    return new OnsetLocator(
        OnsetLocator.DEFAULT_WINDOW, OnsetLocator.DEFAULT_ALLOWANCE, OnsetLocator.DEFAULT_THRESHOLD);
  }

  /** Our scenario: a descending train loss, 5 % noise, logged every 100 steps. */
  private static void feedDescending(OnsetLocator locator, Random random, int from, int to) {
    for (int t = from; t < to; t++) {
      double clean = 0.3 + 2.0 * Math.exp(-t / 800.0);
      locator.add(100L * t, clean * Math.exp(0.05 * random.nextGaussian()));
    }
  }

  @Test
  void findsTheStartOfAJumpAndTheLastGoodStepBeforeIt() {
    Random random = new Random(31);
    OnsetLocator locator = defaults();
    feedDescending(locator, random, 0, 1200);
    for (int t = 1200; t < 1204; t++) {
      double clean = 0.3 + 2.0 * Math.exp(-t / 800.0);
      locator.add(100L * t, 5 * clean * Math.exp(0.05 * random.nextGaussian()));
    }
    OnsetLocator.Onset onset = locator.locate().orElseThrow();
    assertThat(onset.onsetStep()).isEqualTo(120_000);
    assertThat(onset.lastGoodStep()).isEqualTo(119_900);
    assertThat(onset.beforeWindow()).isFalse();
    assertThat(onset.excessSigmas()).isGreaterThan(OnsetLocator.DEFAULT_THRESHOLD);
    assertThat(onset.figures())
        .containsKeys(
            "onset_step", "last_good_step", "before_window", "baseline", "sigma", "excess_sigmas");
  }

  @Test
  void findsTheStartOfAGeometricBlowUpNoLaterThanOneSampleAfterIt() {
    Random random = new Random(32);
    OnsetLocator locator = defaults();
    feedDescending(locator, random, 0, 900);
    for (int t = 900; t < 908; t++) {
      double clean = (0.3 + 2.0 * Math.exp(-t / 800.0)) * Math.pow(1.3, t - 899);
      locator.add(100L * t, clean * Math.exp(0.05 * random.nextGaussian()));
    }
    long onset = locator.locate().orElseThrow().onsetStep();
    assertThat(onset).isBetween(89_000L, 90_100L);
  }

  @Test
  void findsNothingInASeriesWithoutARise() {
    Random random = new Random(33);
    OnsetLocator locator = defaults();
    feedDescending(locator, random, 0, 2000);
    assertThat(locator.locate()).isEmpty();
  }

  @Test
  void countsNonFiniteValuesAsPartOfTheRise() {
    Random random = new Random(34);
    OnsetLocator locator = defaults();
    feedDescending(locator, random, 0, 500);
    for (int t = 500; t < 504; t++) {
      locator.add(100L * t, Double.NaN);
    }
    assertThat(locator.locate().orElseThrow().onsetStep()).isEqualTo(50_000);
    locator.reset();
    assertThat(locator.locate()).isEmpty();
  }

  @Test
  void rejectsBadParametersNamingThem() {
    assertThatThrownBy(() -> new OnsetLocator(8, 0.5, 5))
        .isInstanceOf(IllegalArgumentException.class)
        .hasMessageContaining("window");
    assertThatThrownBy(() -> new OnsetLocator(64, -1, 5))
        .isInstanceOf(IllegalArgumentException.class)
        .hasMessageContaining("allowance");
    assertThatThrownBy(() -> new OnsetLocator(64, 0.5, 0))
        .isInstanceOf(IllegalArgumentException.class)
        .hasMessageContaining("threshold");
  }
}
