package dev.stepwarden.process;

import static org.assertj.core.api.Assertions.assertThat;
import static org.assertj.core.api.Assertions.assertThatThrownBy;

import java.nio.file.Files;
import java.nio.file.Path;
import java.time.Duration;
import java.util.Arrays;
import java.util.HashMap;
import java.util.List;
import java.util.Map;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;

/** The builder fails fast, and its messages name the bad value and the fix. */
class LaunchSpecTest {
  @TempDir Path dir;

  @Test
  void defaultsAreTenSecondsGraceOneMebibyteLinesEchoOnAndTheCurrentDirectory() {
    LaunchSpec s = LaunchSpec.builder().command("python3", "train.py").build();
    assertThat(s.stopGrace()).isEqualTo(Duration.ofSeconds(10));
    assertThat(s.maxLineChars()).isEqualTo(1 << 20);
    assertThat(s.echo()).isTrue();
    assertThat(s.workingDirectory()).isEqualTo(Path.of("").toAbsolutePath());
    assertThat(s.stdoutLog()).isEmpty();
    assertThat(s.environment()).isEmpty();
  }

  @Test
  void rejectsAnEmptyOrNullCommand() {
    assertThatThrownBy(() -> LaunchSpec.builder().command(List.of()))
        .isInstanceOf(IllegalArgumentException.class)
        .hasMessageContaining("LaunchSpec.command").hasMessageContaining("[]");
    assertThatThrownBy(() -> LaunchSpec.builder().command(Arrays.asList("python3", null)))
        .hasMessageContaining("argument 1");
    assertThatThrownBy(() -> LaunchSpec.builder().command(" ", "x"))
        .hasMessageContaining("program name");
    assertThatThrownBy(() -> LaunchSpec.builder().build())
        .isInstanceOf(IllegalStateException.class).hasMessageContaining("no command");
  }

  @Test
  void rejectsAMissingWorkingDirectoryNamingIt() throws Exception {
    Path missing = dir.resolve("nope");
    assertThatThrownBy(() -> LaunchSpec.builder().workingDirectory(missing))
        .hasMessageContaining(missing.toString()).hasMessageContaining("does not exist");
    Path file = Files.createFile(dir.resolve("a-file"));
    assertThatThrownBy(() -> LaunchSpec.builder().workingDirectory(file))
        .hasMessageContaining("is not a directory");
  }

  @Test
  void rejectsUnusableEnvironmentEntries() {
    assertThatThrownBy(() -> LaunchSpec.builder().environment(Map.of("A=B", "x")))
        .hasMessageContaining("'A=B'");
    Map<String, String> nullValue = new HashMap<>();
    nullValue.put("LR", null);
    assertThatThrownBy(() -> LaunchSpec.builder().environment(nullValue))
        .hasMessageContaining("LR").hasMessageContaining("null");
  }

  @Test
  void environmentCallsAddUpAndTheResultIsImmutable() {
    LaunchSpec s = LaunchSpec.builder().command("x").environment(Map.of("A", "1"))
        .environment(Map.of("B", "2")).build();
    assertThat(s.environment()).containsOnly(Map.entry("A", "1"), Map.entry("B", "2"));
    assertThatThrownBy(() -> s.environment().put("C", "3"))
        .isInstanceOf(UnsupportedOperationException.class);
  }

  @Test
  void rejectsBadGraceAndLineLimits() {
    assertThatThrownBy(() -> LaunchSpec.builder().stopGrace(Duration.ofSeconds(-1)))
        .hasMessageContaining("PT-1S");
    assertThatThrownBy(() -> LaunchSpec.builder().maxLineChars(0)).hasMessageContaining("0 is");
    assertThatThrownBy(() -> LaunchSpec.builder().maxLineChars(Integer.MAX_VALUE))
        .hasMessageContaining(Integer.toString(Integer.MAX_VALUE));
  }

  @Test
  void rejectsLogsInMissingDirectoriesAndOneFileForBothStreams() {
    Path orphan = dir.resolve("missing").resolve("out.log");
    assertThatThrownBy(() -> LaunchSpec.builder().stdoutLog(orphan))
        .hasMessageContaining(orphan.getParent().toString());
    assertThatThrownBy(() -> LaunchSpec.builder().stderrLog(dir))
        .hasMessageContaining("is a directory");
    Path both = dir.resolve("both.log");
    assertThatThrownBy(() -> LaunchSpec.builder().command("x").stdoutLog(both).stderrLog(both)
        .build()).hasMessageContaining("its own file");
  }

  @Test
  void toBuilderKeepsEveryValue() {
    LaunchSpec s = LaunchSpec.builder().command("a", "b").workingDirectory(dir)
        .environment(Map.of("K", "V")).stdoutLog(dir.resolve("o")).stderrLog(dir.resolve("e"))
        .echo(false).stopGrace(Duration.ofMillis(250)).maxLineChars(77).build();
    assertThat(s.toBuilder().build()).isEqualTo(s).hasSameHashCodeAs(s);
    assertThat(s.toBuilder().command("c").build().command()).containsExactly("c");
  }
}
