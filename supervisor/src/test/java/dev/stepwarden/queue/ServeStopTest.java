package dev.stepwarden.queue;

import static org.assertj.core.api.Assertions.assertThat;

import java.nio.file.Files;
import java.nio.file.Path;
import java.util.List;
import java.util.concurrent.TimeUnit;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;
import tools.jackson.databind.JsonNode;
import tools.jackson.databind.json.JsonMapper;

/** SIGTERM of serve (what a container engine or systemd sends) while a job runs, twice. */
class ServeStopTest {
  @TempDir
  Path tmp;

  @Test
  void sigtermStopsTheRunningJobInOrderExits143AndTheNextServesResumeAndFinishIt()
      throws Exception {
    Path events = tmp.resolve("events.log");
    Path rules = Fixtures.guardFile(tmp, events, 40, "0.2");
    Path home = tmp.resolve("home");
    String h = home.toString();
    String id = Fixtures.cli("queue", "add", "--home", h, "--rules", rules.toString(),
        "--set", "run.name=long").strip();
    Path audit = home.resolve("runs").resolve(id).resolve("audit.jsonl");
    Path metrics = home.resolve("runs").resolve(id).resolve("metrics.jsonl");

    // 1. the first serve starts the job and is stopped while it runs
    Path log1 = tmp.resolve("serve1.log");
    stopWhileRunning(Fixtures.stepwarden(log1, "serve", "--home", h, "--slots", "1"), log1,
        metrics, 3, events, 0);
    assertThat(Fixtures.read(audit)).contains("\"signal\":\"serve stopping\"")
        .contains("\"outcome\":\"interrupted\"");

    // 2. the second serve continues it (run --resume in this build) and is stopped as well:
    // the resumed run is this JVM's too and is stopped in the same order
    Path log2 = tmp.resolve("serve2.log");
    long before = Fixtures.read(metrics).lines().count();
    stopWhileRunning(Fixtures.stepwarden(log2, "serve", "--home", h, "--slots", "1"), log2,
        metrics, before + 3, events, 1);
    assertThat(Fixtures.read(log2)).contains("job " + id + " started on slot 0");

    // 3. the third serve finishes it
    Path log3 = tmp.resolve("serve3.log");
    Process third = Fixtures.stepwarden(log3, "serve", "--home", h, "--slots", "1");
    try {
      assertThat(Fixtures.await(() -> Fixtures.read(log3).contains("job " + id + " done"),
          90_000)).as("the job ends; serve said:\n" + Fixtures.read(log3)).isTrue();
      third.destroy();
      assertThat(third.waitFor(30, TimeUnit.SECONDS)).as("serve exits on SIGTERM when idle")
          .isTrue();
      assertThat(third.exitValue()).isEqualTo(143);
    } finally {
      third.destroyForcibly();
    }
    JsonMapper json = JsonMapper.builder().build();
    List<JsonNode> jobs = Fixtures.cli("queue", "list", "--home", h, "--json").lines()
        .map(json::readTree).toList();
    assertThat(jobs).singleElement().satisfies(j -> {
      assertThat(j.get("status").asString()).isEqualTo("done");
      assertThat(j.get("outcome").asString()).isEqualTo("finished");
    });
    // the trainer ran to its end once, after two stopped attempts
    assertThat(Fixtures.events(events).stream().filter(e -> e[0].equals("end"))).hasSize(1);
    assertThat(Fixtures.events(events).stream().filter(e -> e[0].equals("start"))).hasSize(3);
    assertThat(Files.readString(home.resolve("serve-audit.jsonl"))).contains("\"serve-stop\"");
  }

  @Test
  void aSecondSigtermKillsTheTrainersWithoutWaitingOutTheirGrace() throws Exception {
    // a trainer that ignores TERM, with a 60 s grace: the first SIGTERM would wait all of it
    Path rules = stubborn("60s");
    Path home = tmp.resolve("home");
    String h = home.toString();
    String id = Fixtures.cli("queue", "add", "--home", h, "--rules", rules.toString()).strip();
    Path log = tmp.resolve("serve.log");
    Process serve = Fixtures.stepwarden(log, "serve", "--home", h, "--slots", "1");
    try {
      assertThat(Fixtures.await(() -> Fixtures.read(home.resolve("runs").resolve(id)
          .resolve("metrics.jsonl")).lines().count() >= 3, 90_000))
          .as("the job runs; serve said:\n" + Fixtures.read(log)).isTrue();
      serve.destroy();
      assertThat(Fixtures.await(() -> Fixtures.read(home.resolve("runs").resolve(id)
          .resolve("audit.jsonl")).contains("\"interrupted\""), 10_000)).isTrue();
      serve.destroy(); // the second SIGTERM
      assertThat(serve.waitFor(30, TimeUnit.SECONDS)).as("serve exits long before the 60 s"
          + " grace; it said:\n" + Fixtures.read(log)).isTrue();
      assertThat(serve.exitValue()).isEqualTo(143);
      assertThat(Fixtures.read(log)).contains("signalled again");
    } finally {
      serve.destroyForcibly();
    }
    List<java.util.Map<String, Object>> audit = dev.stepwarden.audit.AuditReader.read(
        home.resolve("runs").resolve(id).resolve("audit.jsonl")).records();
    assertThat(audit.get(audit.size() - 1)).containsEntry("type", "run-end")
        .containsEntry("outcome", "interrupted");
  }

  /** A guard file whose trainer ignores TERM and prints a metric every 0.1 s for a minute. */
  private Path stubborn(String grace) throws Exception {
    Path script = tmp.resolve("stubborn.sh");
    Files.writeString(script, "trap '' TERM\ni=1\nwhile [ $i -le 600 ]; do\n"
        + "  echo \"{\\\"step\\\": $i, \\\"loss\\\": 0.5}\"\n  sleep 0.1\n  i=$((i+1))\ndone\n");
    Path rules = tmp.resolve("stubborn.yaml");
    Files.writeString(rules, "run:\n  name: stubborn\n  learning_rate: 0.1\n  stop_grace: " + grace
        + "\n  command: [sh, " + script + "]\nlimits:\n  silence: 0\n");
    return rules;
  }

  @Test
  void sigtermStopsTheRunsOfAllSlotsAtOnceNotOneGraceAfterAnother() throws Exception {
    // trainers that ignore TERM use their whole grace (4 s) before the KILL: stopped one after
    // the other, the second would be interrupted 4 s after the first
    Path rules = stubborn("4s");
    Path home = tmp.resolve("home");
    String h = home.toString();
    List<String> ids = List.of(
        Fixtures.cli("queue", "add", "--home", h, "--rules", rules.toString()).strip(),
        Fixtures.cli("queue", "add", "--home", h, "--rules", rules.toString()).strip());
    Path log = tmp.resolve("serve.log");
    Process serve = Fixtures.stepwarden(log, "serve", "--home", h, "--slots", "2");
    try {
      assertThat(Fixtures.await(() -> ids.stream().allMatch(id -> Fixtures.read(home
          .resolve("runs").resolve(id).resolve("metrics.jsonl")).lines().count() >= 3), 90_000))
          .as("both jobs run; serve said:\n" + Fixtures.read(log)).isTrue();
      serve.destroy();
      assertThat(serve.waitFor(30, TimeUnit.SECONDS)).as(Fixtures.read(log)).isTrue();
      assertThat(serve.exitValue()).isEqualTo(143);
    } finally {
      serve.destroyForcibly();
    }
    List<java.time.Instant> stopped = new java.util.ArrayList<>();
    for (String id : ids) {
      List<java.util.Map<String, Object>> audit = dev.stepwarden.audit.AuditReader.read(
          home.resolve("runs").resolve(id).resolve("audit.jsonl")).records();
      java.util.Map<String, Object> interrupted = audit.stream()
          .filter(r -> "interrupted".equals(r.get("type"))).findFirst().orElseThrow();
      stopped.add(java.time.Instant.parse((String) interrupted.get("at")));
      assertThat(audit.get(audit.size() - 1)).containsEntry("type", "run-end")
          .containsEntry("outcome", "interrupted");
    }
    // far below the 4 s grace either way; one after the other would be at least 4 s apart
    assertThat(java.time.Duration.between(stopped.get(0), stopped.get(1)).abs())
        .isLessThan(java.time.Duration.ofSeconds(2));
  }

  /** Waits for {@code lines} metric lines, sends SIGTERM, checks the orderly exit. */
  private static void stopWhileRunning(Process serve, Path log, Path metrics, long lines,
      Path events, int startIndex) throws Exception {
    try {
      assertThat(Fixtures.await(() -> Fixtures.read(metrics).lines().count() >= lines, 90_000))
          .as("the job runs; serve said:\n" + Fixtures.read(log)).isTrue();
      long trainerPid = Long.parseLong(Fixtures.events(events).get(startIndex)[3]);
      serve.destroy(); // SIGTERM
      // the trainer's grace is 2 s; 15 s leaves room for a loaded machine, far below the
      // 60 s bound the stop gives up at
      assertThat(serve.waitFor(30, TimeUnit.SECONDS)).as("serve stops in order; it said:\n"
          + Fixtures.read(log)).isTrue();
      assertThat(serve.exitValue()).as(Fixtures.read(log)).isEqualTo(143);
      assertThat(ProcessHandle.of(trainerPid).map(ProcessHandle::isAlive).orElse(false))
          .as("trainer " + trainerPid + " was stopped").isFalse();
    } finally {
      serve.destroyForcibly();
    }
  }
}
