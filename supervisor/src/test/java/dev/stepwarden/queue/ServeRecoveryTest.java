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

class ServeRecoveryTest {
  @TempDir
  Path tmp;

  @Test
  void killNineOfServeLosesNoQueuedJobAndTheRunningOneIsTakenUpAgain() throws Exception {
    Path events = tmp.resolve("events.log");
    Path rules = Fixtures.guardFile(tmp, events, 10, "0.2");
    Path home = tmp.resolve("home");
    String h = home.toString();
    String running = Fixtures.cli("queue", "add", "--home", h, "--rules", rules.toString(),
        "--set", "run.name=long", "--priority", "9").strip();
    String queued = Fixtures.cli("queue", "add", "--home", h, "--rules", rules.toString(),
        "--set", "run.name=next").strip();
    Path log1 = tmp.resolve("serve1.log");
    Process serve = Fixtures.stepwarden(log1, "serve", "--home", h, "--slots", "1");
    Process again = null;
    try {
      Path audit = home.resolve("runs").resolve(running).resolve("audit.jsonl");
      assertThat(Fixtures.await(() -> Fixtures.read(audit).contains("\"launch\"")
          && Fixtures.read(home.resolve("runs").resolve(running).resolve("metrics.jsonl"))
              .lines().count() >= 3, 90_000))
          .as("the first job runs; serve said:\n" + Fixtures.read(log1)).isTrue();
      long trainerPid = Long.parseLong(Fixtures.events(events).get(0)[3]);

      serve.destroyForcibly(); // SIGKILL: no hook, no goodbye
      assertThat(serve.waitFor(10, TimeUnit.SECONDS)).isTrue();
      assertThat(serve.exitValue()).isEqualTo(137);
      // the trainer was launched with a parent-death signal: it does not outlive serve
      assertThat(Fixtures.await(() -> ProcessHandle.of(trainerPid).map(p -> !p.isAlive())
          .orElse(true), 5_000)).as("trainer " + trainerPid + " is gone").isTrue();
      assertThat(Fixtures.read(audit)).doesNotContain("run-end");

      Path log2 = tmp.resolve("serve2.log");
      again = Fixtures.stepwarden(log2, "serve", "--home", h, "--slots", "1");
      Process a = again;
      assertThat(Fixtures.await(() -> Fixtures.read(log2).contains("job " + queued + " done"),
          90_000)).as("both jobs end; serve said:\n" + Fixtures.read(log2)).isTrue();
      a.destroy();
      assertThat(a.waitFor(30, TimeUnit.SECONDS)).isTrue();
      assertThat(Fixtures.read(log2)).contains("job " + running + " started on slot 0"
          + " (recovering a run whose serve died)");
    } finally {
      serve.destroyForcibly();
      if (again != null) {
        again.destroyForcibly();
      }
    }

    JsonMapper json = JsonMapper.builder().build();
    List<JsonNode> jobs = Fixtures.cli("queue", "list", "--home", h, "--json").lines()
        .map(json::readTree).toList();
    assertThat(jobs).hasSize(2).allSatisfy(j -> {
      assertThat(j.get("status").asString()).isEqualTo("done");
      assertThat(j.get("outcome").asString()).isEqualTo("finished");
    });
    JsonNode first = jobs.stream().filter(j -> j.get("id").asString().equals(running))
        .findFirst().orElseThrow();
    // the job continues in its own run directory (resumed from its state); a job whose
    // supervisor died before its first launch would continue in a second attempt directory
    String dir = first.get("run_dir").asString();
    assertThat(Path.of(dir).getFileName().toString()).isIn(running, running + ".2");
    assertThat(Fixtures.read(Path.of(dir).resolve("audit.jsonl"))).contains("\"run-end\"");
    // nothing ran twice to completion: each job's trainer ended exactly once
    assertThat(Fixtures.events(events).stream().filter(e -> e[0].equals("end"))
        .map(e -> e[1])).containsExactlyInAnyOrder(running, queued);
    assertThat(Files.readString(home.resolve("serve-audit.jsonl")))
        .contains("\"recovering\":true");
  }
}
