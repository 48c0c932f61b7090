package dev.stepwarden.supervise;

import static dev.stepwarden.supervise.Night.ofType;
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

/**
 * Real processes: a trainer starts a worker that leaves its process group (setsid) and keeps the
 * trainer's stdout open, then finishes normally. The trainer's own exit must end the run as
 * finished (not as a hang to be restarted), and the worker must not outlive the run.
 */
class TrainerExitDecidesTest {
  private static final String TRAINER = String.join("\n",
      "import json, subprocess, sys, time",
      "# A worker in a session of its own that inherits stdout and never writes or exits.",
      "w = subprocess.Popen([sys.executable, '-c', 'import time; time.sleep(3600)'],",
      "                     start_new_session=True)",
      "open('worker.pid', 'w').write(str(w.pid))",
      "for step in range(1, 21):",
      "    print(json.dumps({'step': step, 'loss': 1.0 / step, 'lr': 0.1}), flush=True)",
      "    time.sleep(0.02)",
      "");

  /** Running per /proc: a zombie waiting for PID 1 to reap it has exited. */
  private static boolean running(long pid) {
    try {
      String stat = Files.readString(Path.of("/proc", Long.toString(pid), "stat"));
      char state = stat.charAt(stat.lastIndexOf(')') + 2);
      return state != 'Z' && state != 'X';
    } catch (java.io.IOException e) {
      return false;
    }
  }

  @TempDir
  Path tmp;

  @Test
  void aFinishedTrainerWhoseSetsidWorkerHoldsStdoutFinishesTheRunAndTheWorkerIsStopped()
      throws Exception {
    Path work = Files.createDirectories(tmp.resolve("work"));
    Files.writeString(work.resolve("train.py"), TRAINER);
    Path rules = tmp.resolve("guards.yaml");
    Files.writeString(rules, "run:\n  name: leftover\n  workdir: " + work + "\n"
        + "  learning_rate: 0.1\n  stop_grace: 2s\n  command: [python3, -u, train.py]\n"
        + "read:\n  format: json\n  series: { train: loss }\n"
        + "limits:\n  silence: 60s\n  crash_restarts: 3\n");
    Path runDir = tmp.resolve("run");
    Supervisor.Result r = new Supervisor(GuardFiles.load(rules), new RunOptions(runDir, true,
        null, new PrintStream(new ByteArrayOutputStream(), true, StandardCharsets.UTF_8)))
        .run();

    List<Map<String, Object>> audit = Night.audit(runDir);
    assertThat(r.outcome()).as("%s", audit).isEqualTo(RunOutcome.FINISHED);
    assertThat(ofType(audit, "launch")).hasSize(1);
    assertThat(ofType(audit, "silence")).isEmpty();
    assertThat(ofType(audit, "trainer-exit").get(0).get("exit_code")).isEqualTo(0);
    long worker = Long.parseLong(Files.readString(work.resolve("worker.pid")).strip());
    assertThat(running(worker)).as("worker %d running", worker).isFalse();
  }
}
