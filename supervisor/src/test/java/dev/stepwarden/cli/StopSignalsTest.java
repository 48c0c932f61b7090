package dev.stepwarden.cli;

import static org.assertj.core.api.Assertions.assertThat;

import dev.stepwarden.audit.AuditReader;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.List;
import java.util.Map;
import java.util.concurrent.TimeUnit;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;

/**
 * SIGINT and SIGTERM to {@code stepwarden run}: the first stops the trainer with its grace and
 * the run ends in order (its last records written, the signal's exit code); a second one kills
 * the trainer at once instead of waiting out the grace.
 */
class StopSignalsTest {
  /** A trainer that ignores TERM (one busy saving, say) and prints a metric every 0.1 s. */
  private static final String STUBBORN = "trap '' TERM; i=0; while true; do echo step=$i loss=0.5;"
      + " i=$((i+1)); sleep 0.1; done";

  private static Process start(Path tmp, String grace, Path runDir) throws Exception {
    Path rules = tmp.resolve("r.yaml");
    Files.writeString(rules, "run: { learning_rate: 0.1, stop_grace: " + grace + " }\n"
        + "read: { format: pairs, series: { train: loss } }\n");
    Process sup = ChildJvm.stepwarden(tmp, tmp.resolve("out.txt"), "run", "--rules",
        rules.toString(), "--run-dir", runDir.toString(), "--quiet", "--", "/bin/sh", "-c",
        STUBBORN).start();
    Path log = runDir.resolve("trainer.stdout.log");
    long deadline = System.nanoTime() + TimeUnit.SECONDS.toNanos(30);
    while (!(Files.exists(log) && Files.size(log) > 0) && System.nanoTime() < deadline) {
      Thread.sleep(50);
    }
    assertThat(log).as("the trainer started").isNotEmptyFile();
    return sup;
  }

  private static void signal(String name, Process p) throws Exception {
    new ProcessBuilder("kill", "-" + name, Long.toString(p.pid())).start().waitFor();
  }

  private static List<Map<String, Object>> records(Path runDir) throws Exception {
    return AuditReader.read(runDir.resolve("audit.jsonl")).records();
  }

  @Test
  void aSecondSigintKillsATrainerThatIgnoresTermWithoutWaitingOutItsGrace(@TempDir Path tmp)
      throws Exception {
    Path runDir = tmp.resolve("run");
    Process sup = start(tmp, "60s", runDir);
    try {
      signal("INT", sup);
      long deadline = System.nanoTime() + TimeUnit.SECONDS.toNanos(20);
      while (records(runDir).stream().noneMatch(r -> "interrupted".equals(r.get("type")))
          && System.nanoTime() < deadline) {
        Thread.sleep(50);
      }
      assertThat(sup.isAlive()).as("the first SIGINT waits for the trainer's 60 s grace")
          .isTrue();
      signal("INT", sup);
      // One signal alone would take the whole 60 s grace.
      assertThat(sup.waitFor(20, TimeUnit.SECONDS)).as("exited soon after the second SIGINT")
          .isTrue();
      assertThat(sup.exitValue()).isEqualTo(ExitCodes.INTERRUPTED);
    } finally {
      sup.destroyForcibly();
    }
    String out = Files.readString(tmp.resolve("out.txt"));
    assertThat(out).contains("SIGINT again: stopping the trainer now (KILL)");
    List<Map<String, Object>> records = records(runDir);
    assertThat(records).anySatisfy(r -> {
      assertThat(r.get("type")).isEqualTo("interrupted");
      assertThat(r.get("signal")).isEqualTo("SIGINT");
    });
    assertThat(records.get(records.size() - 1)).containsEntry("type", "run-end")
        .containsEntry("outcome", "interrupted");
  }

  @Test
  void sigtermEndsTheRunInOrderWithExitCode143AndTheSignalNamedInTheAudit(@TempDir Path tmp)
      throws Exception {
    Path runDir = tmp.resolve("run");
    Process sup = start(tmp, "1s", runDir);
    try {
      signal("TERM", sup);
      assertThat(sup.waitFor(30, TimeUnit.SECONDS)).isTrue();
      assertThat(sup.exitValue()).isEqualTo(143);
    } finally {
      sup.destroyForcibly();
    }
    List<Map<String, Object>> records = records(runDir);
    assertThat(records).anySatisfy(r -> {
      assertThat(r.get("type")).isEqualTo("interrupted");
      assertThat(r.get("signal")).isEqualTo("SIGTERM");
    });
    assertThat(records.get(records.size() - 1)).containsEntry("type", "run-end")
        .containsEntry("outcome", "interrupted");
    assertThat(Files.readString(runDir.resolve("state.json"))).contains("\"interrupted\"");
  }
}
