package dev.stepwarden.supervise;

import static dev.stepwarden.supervise.Night.num;
import static dev.stepwarden.supervise.Night.ofType;
import static org.assertj.core.api.Assertions.assertThat;

import dev.stepwarden.cli.Main;
import java.io.PrintWriter;
import java.io.StringWriter;
import java.nio.file.Files;
import java.nio.file.Path;
import java.time.Duration;
import java.time.Instant;
import java.util.List;
import java.util.Map;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;

/**
 * Trainers that misbehave, each under the whole supervisor as a user starts it
 * ({@code stepwarden run}, in-process): a crash loop, a hang that also ignores TERM, and a metrics
 * file deleted and replaced mid-run. The trainers are short Python scripts (our own scenarios).
 */
class TrainerFaultsTest {
  @TempDir
  Path tmp;

  private record Run(int code, String err, Path runDir) {}

  private Run run(String script, String rest) throws Exception {
    Path work = Files.createDirectories(tmp.resolve("work"));
    Files.writeString(work.resolve("trainer.py"), script);
    Path rules = work.resolve("guards.yaml");
    Files.writeString(rules, "run:\n  name: fault\n  learning_rate: 0.1\n  workdir: " + work
        + "\n  command: [python3, -u, trainer.py]\n" + rest);
    Path runDir = tmp.resolve("run");
    StringWriter out = new StringWriter();
    StringWriter err = new StringWriter();
    int code = Main.execute(new String[] {"run", "--rules", rules.toString(), "--run-dir",
        runDir.toString(), "-q"}, new PrintWriter(out, true), new PrintWriter(err, true));
    return new Run(code, err.toString(), runDir);
  }

  @Test
  void crashLoopSpendsTheRestartBudgetWithDoublingBackOffAndGivesUpWithExit4()
      throws Exception {
    Run r = run("import sys\nprint('{\"step\": 1, \"loss\": 1.0}', flush=True)\nsys.exit(3)\n",
        "limits:\n  crash_restarts: 3\n  crash_backoff: 100ms\n  silence: 30s\n");

    assertThat(r.code).isEqualTo(4);
    List<Map<String, Object>> audit = Night.audit(r.runDir);
    List<Map<String, Object>> crashes = ofType(audit, "crash");
    List<Map<String, Object>> launches = ofType(audit, "launch");
    assertThat(crashes).hasSize(4); // the first run and three restarts, no more
    assertThat(launches).hasSize(4);
    assertThat(crashes).allMatch(c -> num(c.get("exit_code")) == 3);
    // Back-off before restart k is 100 ms * 2^(k-1): the gap from each crash record to the next
    // launch is at least that (a lower bound on waiting, not a speed claim).
    StringBuilder gaps = new StringBuilder();
    for (int k = 1; k <= 3; k++) {
      long gap = Duration.between(Instant.parse((String) crashes.get(k - 1).get("at")),
          Instant.parse((String) launches.get(k).get("at"))).toMillis();
      gaps.append(gap).append(k < 3 ? ", " : "");
      assertThat(gap).as("back-off before restart %d", k).isGreaterThanOrEqualTo(100L << (k - 1));
    }
    assertThat(ofType(audit, "run-end").get(0).get("outcome")).isEqualTo("gave-up");
    System.out.println("crash loop: 4 crashes, exit 4, back-off gaps " + gaps + " ms");
  }

  @Test
  void aTrainerLoadingDataLongerThanTheSilenceLimitIsNotTakenForHung() throws Exception {
    // 4 s before the first metric (loading data), then lines 0.1 s apart: silence is 2 s
    // (twenty line gaps, room for a loaded machine), but before a launch's first metric the
    // first_metric limit (20 s) holds
    Run r = run("import time\ntime.sleep(4)\nfor i in range(1, 6):\n"
        + "    print('{\"step\": %d, \"loss\": %f}' % (i, 1.0 / i), flush=True)\n"
        + "    time.sleep(0.1)\n",
        "limits:\n  crash_restarts: 0\n  silence: 2s\n  first_metric: 20s\n");

    assertThat(r.code).as(r.err).isZero();
    List<Map<String, Object>> audit = Night.audit(r.runDir);
    assertThat(ofType(audit, "silence")).isEmpty();
    assertThat(ofType(audit, "launch")).hasSize(1);
  }

  @Test
  void aTrainerSilentFromItsLaunchIsHungOnceTheFirstMetricLimitHasPassed() throws Exception {
    Run r = run("import time\ntime.sleep(60)\n",
        "  stop_grace: 1s\nlimits:\n  crash_restarts: 0\n  silence: 1s\n  first_metric: 2s\n");

    assertThat(r.code).as(r.err).isEqualTo(4);
    Map<String, Object> silence = ofType(Night.audit(r.runDir), "silence").get(0);
    assertThat(silence.get("before_first_metric")).isEqualTo(true);
    assertThat(num(silence.get("limit_ms"))).isEqualTo(2000);
    assertThat(num(silence.get("quiet_ms"))).isGreaterThan(2000);
  }

  @Test
  void hungTrainerThatIgnoresTermIsFoundBySilenceAndKilledAfterTheGrace() throws Exception {
    Run r = run("import signal, time\nsignal.signal(signal.SIGTERM, signal.SIG_IGN)\n"
        + "print('{\"step\": 1, \"loss\": 1.0}', flush=True)\n"
        + "while True:\n    time.sleep(1)\n",
        "  stop_grace: 1s\nlimits:\n  crash_restarts: 0\n  silence: 1s\n");

    List<Map<String, Object>> audit = Night.audit(r.runDir);
    assertThat(ofType(audit, "silence")).hasSize(1);
    Map<String, Object> end = ofType(audit, "outcome").get(ofType(audit, "outcome").size() - 1);
    assertThat(end.get("trainer_killed")).isEqualTo(true); // TERM ignored: KILL after 1 s
    assertThat(r.code).isNotEqualTo(0).isNotEqualTo(1);
    assertThat(r.err).doesNotContain("internal error");
    System.out.println("hang + TERM ignored: silence after 1 s, killed after the 1 s grace, exit "
        + r.code);
  }

  @Test
  void metricsFileDeletedAndReplacedMidRunIsFollowedToTheEndInA0700RunDirectory() throws Exception {
    // Writes 30 steps, deletes the file, writes a new one (a new inode) with steps 31..60, then
    // renames a third file over it with steps 61..90.
    String script = "import json, os, time\n"
        + "def write(f, a, b):\n"
        + "    for s in range(a, b):\n"
        + "        f.write(json.dumps({'step': s, 'loss': 1.0 / s}) + '\\n'); f.flush()\n"
        + "        time.sleep(0.01)\n"
        + "with open('m.jsonl', 'w') as f: write(f, 1, 31)\n"
        + "time.sleep(0.6); os.remove('m.jsonl'); time.sleep(0.6)\n"
        + "with open('m.jsonl', 'w') as f: write(f, 31, 61)\n"
        + "time.sleep(0.6)\n"
        + "with open('m.tmp', 'w') as f: write(f, 61, 91)\n"
        + "os.replace('m.tmp', 'm.jsonl'); time.sleep(1.0)\n";
    Run r = run(script, "read:\n  file: m.jsonl\n  series: { train: loss }\n"
        + "limits:\n  silence: 30s\n");

    assertThat(r.code).isZero();
    List<Long> steps = Files.readAllLines(r.runDir.resolve(RunDirectory.METRICS)).stream()
        .map(l -> Long.parseLong(l.replaceAll("^\\{\"step\":(\\d+).*$", "$1"))).toList();
    assertThat(steps).contains(1L, 30L, 31L, 60L, 90L);
    assertThat(steps).doesNotHaveDuplicates();
    System.out.println("metrics file deleted then replaced: " + steps.size()
        + " of 90 steps read");
    // The same real run directory: folders 0700, files 0600 (logs, audit, metrics, state).
    try (java.util.stream.Stream<Path> all = Files.walk(r.runDir)) {
      for (Path p : all.toList()) {
        String perms = java.nio.file.attribute.PosixFilePermissions.toString(
            Files.getPosixFilePermissions(p));
        assertThat(perms).as(p.toString())
            .isEqualTo(Files.isDirectory(p) ? "rwx------" : "rw-------");
      }
    }
  }
}
