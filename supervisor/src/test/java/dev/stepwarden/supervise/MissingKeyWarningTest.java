package dev.stepwarden.supervise;

import static org.assertj.core.api.Assertions.assertThat;

import dev.stepwarden.rules.GuardFiles;
import java.io.ByteArrayOutputStream;
import java.io.PrintStream;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.List;
import java.util.Map;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;

/** A configured validation key the trainer never prints is named while the run goes on. */
class MissingKeyWarningTest {
  @TempDir
  Path tmp;

  @Test
  void aValidationKeyNeverPrintedIsNamedWithThePrintedKeyWithinAnEightEpochRun()
      throws Exception {
    // 8 epochs of 5 steps; each epoch ends with one val_loss line (the guard file wants
    // valid_loss, a mistake of our own making for the test)
    Files.writeString(tmp.resolve("train.sh"), String.join("\n",
        "s=0",
        "for e in 1 2 3 4 5 6 7 8; do",
        "  for i in 1 2 3 4 5; do s=$((s+1)); echo \"{\\\"epoch\\\": $e, \\\"step\\\": $s,"
            + " \\\"loss\\\": 0.5}\"; done",
        "  echo \"{\\\"epoch\\\": $e, \\\"step\\\": $s, \\\"val_loss\\\": 0.6}\"",
        "done", ""));
    Path rules = tmp.resolve("night.yaml");
    Files.writeString(rules, "run:\n  command: [sh, train.sh]\n  learning_rate: 0.1\n"
        + "  workdir: " + tmp + "\n"
        + "read: { series: { train: loss, validation: valid_loss } }\n");
    ByteArrayOutputStream console = new ByteArrayOutputStream();
    Path runDir = tmp.resolve("run");
    Supervisor.Result r = new Supervisor(GuardFiles.load(rules), new RunOptions(runDir,
        true, null, new PrintStream(console, true, StandardCharsets.UTF_8))).run();

    assertThat(r.outcome()).isEqualTo(RunOutcome.FINISHED);
    List<Map<String, Object>> audit = Night.audit(runDir);
    List<Map<String, Object>> warnings = Night.ofType(audit, "warning");
    assertThat(warnings).hasSize(1);
    String message = (String) warnings.get(0).get("message");
    assertThat(message).contains("never printed key 'valid_loss' (did you mean 'val_loss'?)")
        .contains("in 3 epochs").contains("keys it printed: epoch, loss, step, val_loss");
    // read after the third epoch began, long before the 1,000 lines of the general rule
    assertThat(Night.num(warnings.get(0).get("after_lines"))).isEqualTo(13);
    assertThat(audit.indexOf(warnings.get(0)))
        .isLessThan(audit.indexOf(Night.ofType(audit, "run-end").get(0)));
    assertThat(console.toString(StandardCharsets.UTF_8)).contains("stepwarden: warning: series"
        + " validation: stdout never printed key 'valid_loss' (did you mean 'val_loss'?)");
  }
}
