package dev.stepwarden.supervise;

import static org.assertj.core.api.Assertions.assertThat;

import java.util.Map;
import org.junit.jupiter.api.Test;

/** Only our own validated values enter the trainer's argv, each verbatim, never re-expanded. */
class TemplateFillTest {
  @Test
  void aValueWithShellCharactersOrPlaceholdersIsPassedVerbatim() {
    String hostile = "/runs/x/vault/step-000000010--$(touch pwned); {attempt} `id`.ckpt";
    Map<String, String> values = Map.of("resume_from", hostile, "attempt", "7",
        "learning_rate", Launcher.formatRate(0.025));
    assertThat(Launcher.fill("{resume_from}", values)).isEqualTo(hostile);
    assertThat(Launcher.fill("--resume={resume_from}", values)).isEqualTo("--resume=" + hostile);
    assertThat(Launcher.fill("--lr={learning_rate}/{attempt}", values))
        .isEqualTo("--lr=0.025/7");
  }

  @Test
  void ratesAreFormattedAsPlainNumbers() {
    for (double r : new double[] {3.0, 0.1, 1e-7, 2.5e-5, 0.09375}) {
      assertThat(Launcher.formatRate(r)).matches("[0-9.E-]+");
      assertThat(Double.parseDouble(Launcher.formatRate(r))).isEqualTo(r);
    }
  }
}
