package dev.stepwarden.cli;

import static org.assertj.core.api.Assertions.assertThat;

import java.io.PrintWriter;
import java.io.StringWriter;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.concurrent.TimeUnit;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;

/**
 * One supervisor per run directory, across processes: while a supervisor in a child JVM runs, a
 * {@code run --resume} of its folder and a second {@code run} into it are refused at once (exit 2)
 * naming the live process; nothing of the live run is touched.
 */
class RunOwnershipTest {
  @TempDir Path tmp;

  @Test
  void resumeAndASecondRunOfALiveRunAreRefusedAtOnceNamingTheProcess() throws Exception {
    Files.writeString(tmp.resolve("slow.py"), "import time\nfor i in range(600):\n"
        + "    print('step=%d loss=1.0' % i, flush=True)\n    time.sleep(0.1)\n");
    Path rules = tmp.resolve("guards.yaml");
    Files.writeString(rules, "run:\n  name: long\n  learning_rate: 0.1\n  stop_grace: 2s\n"
        // absolute: the second run below starts from this JVM's folder, where a relative name
        // would be refused first by the missing-script check (exit 78)
        + "  command: [python3, -u, \"" + tmp.resolve("slow.py") + "\"]\n"
        + "read:\n  format: pairs\n  series: { train: loss }\n"
        + "limits:\n  learning_rate: { min: 1.0e-6, max: 1.0 }\n");
    Path runDir = tmp.resolve("run");
    Process sup = ChildJvm.stepwarden(tmp, tmp.resolve("first.out"), "run", "--rules",
        rules.toString(), "--run-dir", runDir.toString(), "-q").start();
    try {
      long until = System.nanoTime() + TimeUnit.SECONDS.toNanos(60);
      Path log = runDir.resolve("trainer.stdout.log"); // the trainer is running
      while ((!Files.exists(log) || Files.size(log) == 0) && sup.isAlive()
          && System.nanoTime() < until) {
        Thread.sleep(20);
      }
      assertThat(sup.isAlive()).as(Files.readString(tmp.resolve("first.out"))).isTrue();
      String auditBefore = Files.readString(runDir.resolve("audit.jsonl"));

      StringWriter err = new StringWriter();
      long t0 = System.nanoTime();
      int code = Main.execute(new String[] {"run", "--resume", runDir.toString(), "-q"},
          new PrintWriter(new StringWriter()), new PrintWriter(err));
      long tookMillis = TimeUnit.NANOSECONDS.toMillis(System.nanoTime() - t0);
      assertThat(code).as(err.toString()).isEqualTo(ExitCodes.USAGE);
      assertThat(err.toString()).contains("being supervised right now by process " + sup.pid());
      // "at once": no waiting for the live run; generous for a loaded machine.
      assertThat(tookMillis).isLessThan(10_000);

      StringWriter err2 = new StringWriter();
      int code2 = Main.execute(new String[] {"run", "--rules", rules.toString(), "--run-dir",
          runDir.toString(), "-q"}, new PrintWriter(new StringWriter()), new PrintWriter(err2));
      assertThat(code2).as(err2.toString()).isEqualTo(ExitCodes.USAGE);
      assertThat(err2.toString()).contains("process " + sup.pid());
      assertThat(Files.readString(runDir.resolve("audit.jsonl"))).startsWith(auditBefore);
      assertThat(sup.isAlive()).isTrue();
    } finally {
      sup.toHandle().descendants().forEach(ProcessHandle::destroyForcibly);
      sup.destroyForcibly();
      sup.waitFor(10, TimeUnit.SECONDS);
    }
  }
}
