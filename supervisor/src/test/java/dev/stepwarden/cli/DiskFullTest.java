package dev.stepwarden.cli;

import static org.assertj.core.api.Assertions.assertThat;

import dev.stepwarden.audit.AuditReader;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.concurrent.TimeUnit;
import org.junit.jupiter.api.Assumptions;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;

/**
 * A full disk under the run directory (a 512 KiB tmpfs mounted for the test): the supervisor
 * stops the trainer, says why in one line, exits 1, and leaves no half-written audit record.
 */
class DiskFullTest {
  @Test
  void fullRunDirectoryStopsSafelyWithAClearMessageAndNoTornRecord(@TempDir Path tmp)
      throws Exception {
    Path runDir = tmp.resolve("small");
    Files.createDirectories(runDir);
    Process mount = new ProcessBuilder("mount", "-t", "tmpfs", "-o", "size=512k", "tmpfs",
        runDir.toString()).redirectErrorStream(true).start();
    boolean mounted = mount.waitFor(10, TimeUnit.SECONDS) && mount.exitValue() == 0;
    Assumptions.assumeTrue(mounted, "cannot mount a small tmpfs here (needs root): "
        + new String(mount.getInputStream().readAllBytes()).trim());
    try {
      Path rules = tmp.resolve("r.yaml");
      Files.writeString(rules, "run: { learning_rate: 0.1, stop_grace: 2s }\n"
          + "read: { format: pairs, series: { train: loss } }\n");
      Path pidFile = tmp.resolve("trainer.pid");
      Path out = tmp.resolve("out.txt");
      Process sup = ChildJvm.stepwarden(tmp, out, "run", "--rules", rules.toString(),
          "--run-dir", runDir.toString(), "--quiet", "--", "python3", "-c",
          "import os,time\nopen('" + pidFile + "','w').write(str(os.getpid()))\n"
              + "pad='x'*200\ni=0\nwhile True:\n"
              + "  print(f'step={i} loss=0.5 note={pad}', flush=True); i+=1\n"
              + "  time.sleep(0.0005)\n").start();
      assertThat(sup.waitFor(90, TimeUnit.SECONDS)).as("supervisor stopped").isTrue();
      String printed = Files.readString(out);
      assertThat(sup.exitValue()).as(printed).isEqualTo(ExitCodes.INTERNAL);
      assertThat(printed).contains("No space left on device").contains("cannot write the run"
          + " directory").contains("the trainer was stopped").doesNotContain("\tat ");
      long trainer = Long.parseLong(Files.readString(pidFile).trim());
      ChildJvm.waitGone(trainer, 10_000);
      assertThat(ChildJvm.alive(trainer)).as("trainer stopped").isFalse();
      AuditReader.Contents audit = AuditReader.read(runDir.resolve("audit.jsonl"));
      assertThat(audit.badLines()).isEmpty();
      assertThat(audit.tornLastLine()).isFalse();
      assertThat(audit.records()).extracting(r -> r.get("type")).contains("run-start",
          "launch");
      System.out.println("disk full: exit " + sup.exitValue() + ", " + audit.records().size()
          + " whole audit records, message: " + printed.strip().lines().reduce((a, b) -> b)
              .orElse(""));
    } finally {
      new ProcessBuilder("umount", "-l", runDir.toString()).start().waitFor(10,
          TimeUnit.SECONDS);
    }
  }
}
