package dev.stepwarden.cli;

import static org.assertj.core.api.Assertions.assertThat;

import java.nio.file.Files;
import java.nio.file.Path;
import java.util.List;
import java.util.stream.Stream;
import org.junit.jupiter.api.Test;

/** The ready-made guard files in rules/ all pass `check`, and the shipped schema is current. */
class ShippedRulesTest {
  static final Path RULES = Path.of("..", "rules");

  @Test
  void everyShippedGuardFilePassesCheck() throws Exception {
    List<Path> files;
    try (Stream<Path> s = Files.list(RULES)) {
      files = s.filter(p -> p.toString().endsWith(".yaml")).sorted().toList();
    }
    assertThat(files).hasSizeGreaterThanOrEqualTo(3);
    for (Path f : files) {
      CliTest.Out r = CliTest.run("check", f.toString());
      assertThat(r.code()).as(f + ": " + r.err()).isZero();
      assertThat(r.out()).contains(f + ": valid");
    }
  }

  @Test
  void theSchemaInRulesIsWhatTheLoaderAcceptsToday() throws Exception {
    String shipped = Files.readString(RULES.resolve("guard-file.schema.json")).strip();
    assertThat(CliTest.run("schema").out().strip())
        .as("regenerate with: stepwarden schema > rules/guard-file.schema.json")
        .isEqualTo(shipped);
  }
}
