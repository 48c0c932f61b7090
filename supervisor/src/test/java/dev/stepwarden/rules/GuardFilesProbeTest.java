package dev.stepwarden.rules;

import static org.assertj.core.api.Assertions.assertThat;
import static org.assertj.core.api.Assertions.assertThatThrownBy;

import java.nio.charset.StandardCharsets;
import java.nio.file.Path;
import org.junit.jupiter.api.Test;

/** The optional probe section of the guard file (our own keys). */
class GuardFilesProbeTest {
  static GuardFile parse(String yaml) throws ConfigException {
    return GuardFiles.parse(yaml.getBytes(StandardCharsets.UTF_8), Path.of("probe.yaml"));
  }

  @Test
  void readsTheProbeSectionWithDefaults() throws Exception {
    GuardFile g = parse("run: { command: [sh], learning_rate: 0.1 }\nprobe: { from: 1.0e-4, to: 3 }\n");
    assertThat(g.probe()).contains(new GuardFile.Probe(1e-4, 3, 40, 2, 0.3));
  }

  @Test
  void readsTheBranchCheckOfThePickAndRefusesANegativeOne() throws Exception {
    GuardFile g = parse("run: { command: [sh], learning_rate: 0.1 }\n"
        + "probe: { from: 1.0e-4, to: 3, branch: 50 }\n");
    assertThat(g.probe().orElseThrow().branch()).isEqualTo(50);
    assertThatThrownBy(() -> parse("run: { command: [sh], learning_rate: 0.1 }\n"
        + "probe: { from: 1.0e-4, to: 3, branch: -1 }\n"))
        .isInstanceOf(ConfigException.class).hasMessageContaining("branch");
  }

  @Test
  void fileWithoutProbeHasNone() throws Exception {
    assertThat(parse("run: { command: [sh], learning_rate: 0.1 }\n").probe()).isEmpty();
  }

  @Test
  void refusesARampThatDoesNotRise() {
    assertThatThrownBy(() -> parse("run: { command: [sh], learning_rate: 0.1 }\n"
        + "probe: { from: 1, to: 0.1 }\n"))
        .isInstanceOf(ConfigException.class).hasMessageContaining("from < to");
  }

  @Test
  void refusesTheProbeWithRestartSteering() {
    assertThatThrownBy(() -> parse("run: { command: [sh], learning_rate: 0.1 }\n"
        + "steer: { by: restart }\nprobe: { from: 0.001, to: 1 }\n"))
        .isInstanceOf(ConfigException.class).hasMessageContaining("control-file");
  }
}
