package dev.stepwarden.rules;

import static org.assertj.core.api.Assertions.assertThat;
import static org.assertj.core.api.Assertions.assertThatThrownBy;

import java.time.Duration;
import org.junit.jupiter.api.Test;

class DurationsTest {
  @Test
  void oneSyntaxForEveryUnitAndFractions() {
    assertThat(Durations.parse("500ms")).isEqualTo(Duration.ofMillis(500));
    assertThat(Durations.parse("30")).isEqualTo(Duration.ofSeconds(30));
    assertThat(Durations.parse("30s")).isEqualTo(Duration.ofSeconds(30));
    assertThat(Durations.parse("15m")).isEqualTo(Duration.ofMinutes(15));
    assertThat(Durations.parse(" 1h ")).isEqualTo(Duration.ofHours(1));
    assertThat(Durations.parse("1.5h")).isEqualTo(Duration.ofMinutes(90));
    assertThat(Durations.parse("2d")).isEqualTo(Duration.ofDays(2));
  }

  @Test
  void refusalsNameTheOptionAndShowTheSyntax() {
    assertThatThrownBy(() -> Durations.option("--checkin", "soon"))
        .hasMessage("--checkin must be " + Durations.EXAMPLES + ", not 'soon'");
    assertThatThrownBy(() -> Durations.parse("400d")).hasMessage("is 400d; at most a year is"
        + " accepted");
    assertThatThrownBy(() -> Durations.parse("-5s")).isInstanceOf(IllegalArgumentException.class);
  }

  @Test
  void theCommandLineAndTheGuardFileReadTheSameWords() throws Exception {
    // serve --checkin 1h was refused before the parsers were one
    GuardFile g = GuardFiles.parse("run: { name: x, learning_rate: 0.1 }\nlimits: { silence: 1h }\n"
        .getBytes(java.nio.charset.StandardCharsets.UTF_8), java.nio.file.Path.of("g.yaml"));
    assertThat(g.limits().silence()).isEqualTo(Durations.parse("1h"));
  }
}
