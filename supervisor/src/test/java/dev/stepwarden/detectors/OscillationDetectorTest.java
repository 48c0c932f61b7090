package dev.stepwarden.detectors;

import static org.assertj.core.api.Assertions.assertThat;
import static org.assertj.core.api.Assertions.assertThatThrownBy;

import java.util.Optional;
import java.util.Random;
import org.junit.jupiter.api.Test;

class OscillationDetectorTest {

  private static OscillationDetector defaults() {
    return new OscillationDetector(
        "train",
        OscillationDetector.DEFAULT_WINDOW,
        OscillationDetector.DEFAULT_MAX_AUTOCORR,
        OscillationDetector.DEFAULT_MAX_REL_SLOPE,
        0);
  }

  @Test
  void firesOnABounceThatMakesNoProgress() {
    // Our scenario: level 1.0, bounce +-0.05 every other sample, noise sd 0.01.
    Random random = new Random(8);
    OscillationDetector d = defaults();
    Optional<Evidence> fired = Optional.empty();
    int t = 0;
    for (; t < 200 && fired.isEmpty(); t++) {
      fired = d.offer(t, 1.0 + 0.05 * (t % 2 == 0 ? 1 : -1) + 0.01 * random.nextGaussian());
    }
    assertThat(t).isEqualTo(OscillationDetector.DEFAULT_WINDOW); // as soon as the window is full
    Evidence e = fired.orElseThrow();
    assertThat(e.detector()).isEqualTo("wobbles");
    assertThat((double) e.figures().get("diff_autocorr")).isLessThanOrEqualTo(-0.75);
    assertThat((double) e.figures().get("relative_net_change")).isLessThanOrEqualTo(0.02);
    assertThat(e.figures())
        .containsKeys("window", "limit_autocorr", "sen_slope", "mean", "first_step", "last_step");
    assertThat(e.summary()).startsWith("train goes up and down without net progress");
  }

  @Test
  void staysQuietOnABounceRidingAFastDescent() {
    // Same bounce, but the level falls by 0.2 % per sample: 8 % across the window, real progress.
    OscillationDetector d = defaults();
    for (int t = 0; t < 300; t++) {
      double level = 1.0 * Math.pow(0.998, t);
      assertThat(d.offer(t, level * (1 + 0.05 * (t % 2 == 0 ? 1 : -1)))).isEmpty();
    }
  }

  @Test
  void staysQuietOnPlainNoiseWhoseDifferencesAlreadyAlternate() {
    // White noise alone gives differences with lag-1 autocorrelation near -0.5 (derived in the
    // class comment); the default limit sits well below that.
    Random random = new Random(9);
    OscillationDetector d = defaults();
    int fired = 0;
    for (int t = 0; t < 20_000; t++) {
      if (d.offer(t, 0.8 * Math.exp(0.1 * random.nextGaussian())).isPresent()) {
        fired++;
        d.reset();
      }
    }
    assertThat(fired).isLessThanOrEqualTo(20); // goal: <= 1 per 1000 points
  }

  @Test
  void aPerfectLineHasNoDefinedAutocorrelationAndNeverFires() {
    OscillationDetector d = new OscillationDetector(8, -0.75, 1.0);
    for (int t = 0; t < 50; t++) {
      assertThat(d.offer(t, 5 - 0.001 * t)).isEmpty();
    }
  }

  @Test
  void rejectsBadParametersNamingThem() {
    assertThatThrownBy(() -> new OscillationDetector(4, -0.75, 0.02))
        .isInstanceOf(IllegalArgumentException.class)
        .hasMessageContaining("over");
    assertThatThrownBy(() -> new OscillationDetector(40, 0.5, 0.02))
        .isInstanceOf(IllegalArgumentException.class)
        .hasMessageContaining("autocorr_below")
        .hasMessageContaining("0.5");
    assertThatThrownBy(() -> new OscillationDetector(40, -0.75, -1))
        .isInstanceOf(IllegalArgumentException.class)
        .hasMessageContaining("net_change_below");
  }
}
