package dev.stepwarden.cli;

import static org.assertj.core.api.Assertions.assertThat;

import dev.stepwarden.audit.AuditReader;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.concurrent.TimeUnit;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;

/** SIGINT to the supervisor stops the trainer and the grandchild it forked, and is audited. */
class InterruptStopsTreeTest {
  @Test
  void sigintLeavesNeitherTrainerNorGrandchildBehind(@TempDir Path tmp) throws Exception {
    Path rules = tmp.resolve("r.yaml");
    Files.writeString(rules, "run: { learning_rate: 0.1, stop_grace: 2s }\n"
        + "read: { format: pairs, series: { train: loss } }\n");
    Path pids = tmp.resolve("pids.txt");
    // The trainer forks a grandchild that sleeps; both write their pids.
    String script = "sleep 300 & echo $! > " + pids + ".child; echo $$ > " + pids + "; "
        + "i=0; while true; do echo step=$i loss=0.5; i=$((i+1)); sleep 0.1; done";
    Path runDir = tmp.resolve("run");
    Process sup = ChildJvm.stepwarden(tmp, tmp.resolve("out.txt"), "run", "--rules",
        rules.toString(), "--run-dir", runDir.toString(), "--quiet", "--", "/bin/sh", "-c",
        script).start();
    Path child = Path.of(pids + ".child");
    long deadline = System.nanoTime() + TimeUnit.SECONDS.toNanos(30);
    while (!(Files.exists(pids) && Files.exists(child) && Files.size(child) > 0
        && Files.size(pids) > 0) && System.nanoTime() < deadline) {
      Thread.sleep(50);
    }
    long trainer = Long.parseLong(Files.readString(pids).trim());
    long grandchild = Long.parseLong(Files.readString(child).trim());
    assertThat(ChildJvm.alive(trainer)).isTrue();
    assertThat(ChildJvm.alive(grandchild)).isTrue();

    new ProcessBuilder("kill", "-INT", Long.toString(sup.pid())).start().waitFor();
    assertThat(sup.waitFor(30, TimeUnit.SECONDS)).isTrue();
    assertThat(sup.exitValue()).isEqualTo(ExitCodes.INTERRUPTED);
    ChildJvm.waitGone(trainer, 5_000);
    ChildJvm.waitGone(grandchild, 5_000);
    assertThat(ChildJvm.alive(trainer)).as("trainer " + trainer).isFalse();
    assertThat(ChildJvm.alive(grandchild)).as("grandchild " + grandchild).isFalse();
    AuditReader.Contents audit = AuditReader.read(runDir.resolve("audit.jsonl"));
    assertThat(audit.records()).anySatisfy(r -> assertThat(r.get("type"))
        .isEqualTo("interrupted"));
  }
}
