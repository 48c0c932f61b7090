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

/** SIGHUP (the SSH session or terminal that started the run went away) does not end the run. */
class HangupTest {
  @Test
  void sighupIsRecordedAndTheRunGoesOnToItsEnd(@TempDir Path tmp) throws Exception {
    Path rules = tmp.resolve("r.yaml");
    Files.writeString(rules, "run: { learning_rate: 0.1, stop_grace: 2s }\n"
        + "read: { format: pairs, series: { train: loss } }\n");
    Path started = tmp.resolve("started");
    // 40 lines 0.1 s apart: the signal arrives while the trainer runs
    String script = "touch " + started + "; i=1; while [ $i -le 40 ]; do echo step=$i loss=0.5;"
        + " i=$((i+1)); sleep 0.1; done";
    Path runDir = tmp.resolve("run");
    Process sup = ChildJvm.stepwarden(tmp, tmp.resolve("out.txt"), "run", "--rules",
        rules.toString(), "--run-dir", runDir.toString(), "--quiet", "--", "/bin/sh", "-c",
        script).start();
    try {
      long deadline = System.nanoTime() + TimeUnit.SECONDS.toNanos(30);
      while (!Files.exists(started) && System.nanoTime() < deadline) {
        Thread.sleep(50);
      }
      assertThat(started).exists();
      Thread.sleep(300); // the handlers are installed before the launch; leave a margin anyway
      new ProcessBuilder("kill", "-HUP", Long.toString(sup.pid())).start().waitFor();

      assertThat(sup.waitFor(60, TimeUnit.SECONDS)).isTrue();
      assertThat(sup.exitValue()).as(Files.readString(tmp.resolve("out.txt"))).isZero();
    } finally {
      sup.destroyForcibly();
    }
    List<Map<String, Object>> records = AuditReader.read(runDir.resolve("audit.jsonl")).records();
    assertThat(records).anySatisfy(r -> {
      assertThat(r.get("type")).isEqualTo("hangup");
      assertThat(r.get("signal")).isEqualTo("SIGHUP");
    });
    assertThat(records).noneSatisfy(r -> assertThat(r.get("type")).isEqualTo("interrupted"));
    assertThat(records.get(records.size() - 1)).containsEntry("type", "run-end")
        .containsEntry("outcome", "finished");
  }
}
