package dev.stepwarden.supervise;

import static dev.stepwarden.supervise.Night.num;
import static dev.stepwarden.supervise.Night.ofType;
import static org.assertj.core.api.Assertions.assertThat;

import dev.stepwarden.rules.GuardFiles;
import java.io.ByteArrayOutputStream;
import java.io.PrintStream;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.ArrayList;
import java.util.List;
import java.util.Map;
import java.util.concurrent.CompletableFuture;
import java.util.concurrent.TimeUnit;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;
import tools.jackson.databind.JsonNode;
import tools.jackson.databind.json.JsonMapper;

/**
 * The moments between a generation's end and its follow-up, with real processes: a supervisor
 * killed with SIGKILL after a rewind decision but before the relaunch, and stop signals before
 * the first launch and during a crash back-off.
 */
class GenerationEndsTest {
  private static final JsonMapper JSON = JsonMapper.builder().build();

  @TempDir
  Path tmp;

  @Test
  void aSupervisorKilledBetweenARewindDecisionAndItsRelaunchResumesAtTheDecidedTarget()
      throws Exception {
    Night n = new Night(tmp);
    // The trainer needs 4 s to exit on TERM: a wide window between the decision (and the state
    // that plans the relaunch) and the relaunch itself.
    n.rules("--listen, --steps, \"90\", --eval-every, \"10\", --numbered, --delay, \"0.05\","
        + " --diverge-at, \"40\", --stable-below, \"0.06\", --growth-steps, \"10\","
        + " --term-delay, \"4\"", "steer: { by: control-file, confirm_within: 10s }\n"
        + "checkpoints: { watch: ckpt/step-*.json, keep: 10 }\n"
        + "guards:\n  - name: blow-up\n"
        + "    when: { rises: { series: train, above_level: 3x, samples: 2, noise_units: 3 } }\n"
        + "    do: [ rewind, { scale: 0.5 } ]\n"
        + "limits:\n  learning_rate: { min: 0.001, max: 1.0 }\n  silence: 20s\n");
    Path rules = tmp.resolve("guards.yaml");
    List<String> cmd = new ArrayList<>(List.of(Path.of(System.getProperty("java.home"), "bin",
        "java").toString(), "-XX:+UseSerialGC", "-XX:TieredStopAtLevel=1", "-cp",
        System.getProperty("java.class.path"), "dev.stepwarden.cli.Main", "run", "--rules",
        rules.toString(), "--run-dir", n.runDir.toString(), "-q"));
    Process sup = new ProcessBuilder(cmd).directory(n.work.toFile())
        .redirectOutput(n.work.resolve("supervisor.out").toFile()).redirectErrorStream(true)
        .start();
    Path state = n.runDir.resolve(RunDirectory.STATE);
    long deadline = System.nanoTime() + TimeUnit.SECONDS.toNanos(90);
    JsonNode planned = null;
    while (planned == null && sup.isAlive() && System.nanoTime() < deadline) {
      Thread.sleep(5);
      try {
        JsonNode st = JSON.readTree(Files.readString(state));
        planned = st.path("planned_relaunch").isObject() ? st : null;
      } catch (java.io.IOException | RuntimeException e) {
        // not there yet, or being replaced
      }
    }
    assertThat(planned).as("a state with the planned rewind").isNotNull();
    sup.destroyForcibly().waitFor(); // SIGKILL: no hook, no grace
    long target = planned.path("planned_relaunch").path("target_step").asLong();
    assertThat(planned.path("learning_rate").asDouble()).isEqualTo(0.05);
    assertThat(ofType(n.audit(), "launch")).hasSize(1); // the relaunch had not happened

    Supervisor.Result r = Supervisor.resume(n.runDir, GuardFiles.load(
        n.runDir.resolve(RunDirectory.GUARDS)), new RunOptions(n.runDir, true, null,
        new PrintStream(new ByteArrayOutputStream(), true, StandardCharsets.UTF_8))).run();

    List<Map<String, Object>> audit = n.audit();
    assertThat(r.outcome()).as("%s", audit).isEqualTo(RunOutcome.FINISHED);
    Map<String, Object> resume = ofType(audit, "run-resume").get(0);
    assertThat(resume.get("planned_relaunch")).isEqualTo("rewind");
    assertThat(num(resume.get("resume_step"))).isLessThanOrEqualTo(target);
    Map<String, Object> relaunch = ofType(audit, "launch").get(1);
    assertThat(relaunch.get("learning_rate")).isEqualTo(0.05);
    assertThat(ofType(audit, "decision")).hasSize(1);
    // No vault file is left that the state does not name.
    try (var files = Files.list(n.runDir.resolve(RunDirectory.VAULT))) {
      String st = Files.readString(state);
      assertThat(files.map(p -> p.toString())).allMatch(st::contains);
    }
  }

  @Test
  void aStopSignalBeforeTheFirstLaunchEndsTheRunWithoutATrainerAnd143ForTerm()
      throws Exception {
    Night n = new Night(tmp);
    Supervisor s = new Supervisor(n.rules("--steps, \"50\"", ""), quietOptions(n));
    s.interrupt("SIGTERM");
    Supervisor.Result r = s.run();

    assertThat(r.outcome()).isEqualTo(RunOutcome.INTERRUPTED);
    List<Map<String, Object>> audit = n.audit();
    assertThat(ofType(audit, "launch")).isEmpty();
    assertThat(ofType(audit, "run-end").get(0).get("exit_code")).isEqualTo(143);
  }

  @Test
  void aStopSignalDuringACrashBackOffLaunchesNothingMore() throws Exception {
    Night n = new Night(tmp);
    Supervisor s = new Supervisor(n.rules("--steps, \"50\", --crash-at, \"3\", --delay,"
        + " \"0.01\"", "limits:\n  crash_restarts: 3\n  crash_backoff: 60s\n"),
        quietOptions(n));
    CompletableFuture<Supervisor.Result> run = CompletableFuture.supplyAsync(() -> {
      try {
        return s.run();
      } catch (Exception e) {
        throw new IllegalStateException(e);
      }
    });
    // The crash count reaches the state before the back-off (60 s) begins: a supervisor killed
    // while waiting keeps it.
    Path state = n.runDir.resolve(RunDirectory.STATE);
    long deadline = System.nanoTime() + TimeUnit.SECONDS.toNanos(45);
    int counted = 0;
    while (counted == 0 && System.nanoTime() < deadline) {
      Thread.sleep(20);
      try {
        counted = JSON.readTree(Files.readString(state)).path("crash_restarts").asInt();
      } catch (java.io.IOException | RuntimeException e) {
        // not written yet, or being replaced
      }
    }
    assertThat(counted).isEqualTo(1);
    assertThat(JSON.readTree(Files.readString(state)).path("planned_relaunch")
        .path("reason").asString()).isEqualTo("crash");
    s.interrupt("SIGINT");
    Supervisor.Result r = run.get(20, TimeUnit.SECONDS); // not the 60 s back-off

    assertThat(r.outcome()).isEqualTo(RunOutcome.INTERRUPTED);
    List<Map<String, Object>> audit = n.audit();
    assertThat(ofType(audit, "launch")).hasSize(1);
    assertThat(ofType(audit, "run-end").get(0).get("exit_code")).isEqualTo(130);
  }

  private static RunOptions quietOptions(Night n) {
    return new RunOptions(n.runDir, true, null,
        new PrintStream(new ByteArrayOutputStream(), true, StandardCharsets.UTF_8));
  }
}
