package dev.stepwarden.supervise;

import static dev.stepwarden.supervise.Night.num;
import static dev.stepwarden.supervise.Night.ofType;
import static org.assertj.core.api.Assertions.assertThat;

import java.nio.file.Files;
import java.nio.file.Path;
import java.nio.file.attribute.BasicFileAttributes;
import java.util.List;
import java.util.Map;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;
import tools.jackson.databind.json.JsonMapper;

/**
 * One test per steering path, each with a real child process: the toy Python trainer (invented
 * curves, our own scenario), with or without the Python control-file helper. Time limits are
 * short (silence 2 s, confirmation 1 s) to keep the suite fast; nothing asserts on speed.
 */
class SteeringTest {
  private static final JsonMapper JSON = JsonMapper.builder().build();

  private static final String PLATEAU_GUARD = "guards:\n"
      + "  - name: flat\n"
      + "    when: { flattens: { series: validation, over: 3, gain_below: 1% } }\n"
      + "    do: { scale: 0.5 }\n"
      + "    then_wait: 1000\n"
      + "limits:\n  learning_rate: { min: 0.001, max: 1.0 }\n  crash_restarts: 2\n"
      + "  crash_backoff: 100ms\n  silence: 20s\n";

  @TempDir
  Path tmp;

  @Test
  void liveChangeThroughTheControlFileIsConfirmedByAppliedRevision() throws Exception {
    Night n = new Night(tmp);
    Supervisor.Result r = n.run(n.rules("--listen, --steps, \"120\", --eval-every, \"10\","
        + " --delay, \"0.01\"", "steer: { by: control-file, confirm_within: 10s }\n"
        + PLATEAU_GUARD));

    assertThat(r.outcome()).isEqualTo(RunOutcome.FINISHED);
    List<Map<String, Object>> audit = n.audit();
    Map<String, Object> decision = ofType(audit, "decision").get(0);
    assertThat(decision.get("rate_after")).isEqualTo(0.05);
    // The launch's own rate is confirmed first (0.1), then the live change.
    assertThat(ofType(audit, "confirmed").get(0).get("for")).isEqualTo("launch 1");
    Map<String, Object> confirmed = ofType(audit, "confirmed").stream()
        .filter(c -> "live change".equals(c.get("for"))).findFirst().orElseThrow();
    assertThat(confirmed.get("by")).isEqualTo("applied_revision");
    assertThat(confirmed.get("learning_rate")).isEqualTo(0.05);
    assertThat(ofType(audit, "not-confirmed")).isEmpty();
    assertThat(ofType(audit, "launch")).hasSize(1); // changed live, no restart
    // The trainer's own lines after the change carry the new rate.
    List<String> out = Files.readAllLines(n.runDir.resolve(RunDirectory.STDOUT)).stream()
        .filter(l -> l.contains("\"loss\"")).toList();
    assertThat(out.get(out.size() - 1)).contains("\"lr\": 0.05").contains("\"applied_revision\"");
  }

  @Test
  void unconfirmedChangeFallsBackToARestartWithTheNewRate() throws Exception {
    Night n = new Night(tmp);
    // No --listen: this trainer never looks at the control file.
    Supervisor.Result r = n.run(n.rules("--steps, \"140\", --eval-every, \"10\", --delay,"
        + " \"0.02\", --numbered", "steer: { by: control-file, confirm_within: 1s,"
        + " unconfirmed: restart }\ncheckpoints: { watch: ckpt/step-*.json, keep: 3 }\n"
        + PLATEAU_GUARD));

    assertThat(r.outcome()).isEqualTo(RunOutcome.FINISHED);
    List<Map<String, Object>> audit = n.audit();
    Map<String, Object> missed = ofType(audit, "not-confirmed").get(0);
    assertThat(missed.get("fallback")).isEqualTo("restart");
    List<Map<String, Object>> launches = ofType(audit, "launch");
    assertThat(launches).hasSize(2);
    assertThat(launches.get(1).get("reason")).isEqualTo("change not confirmed");
    assertThat(argv(launches.get(1))).contains("0.05");
    assertThat(String.valueOf(launches.get(1).get("resume_from")))
        .startsWith(n.runDir.resolve(RunDirectory.VAULT).toString());
  }

  @Test
  void aTrainerReportingValidationFasterThanTheTickStillGetsItsConfirmationTimeOut()
      throws Exception {
    Night n = new Night(tmp);
    // Validation on every step, every 20 ms: each value queues a checkpoint scan, ten times per
    // 200 ms tick. The periodic work (here: the confirmation time-out) must still run.
    Supervisor.Result r = n.run(n.rules("--steps, \"150\", --eval-every, \"1\", --delay,"
        + " \"0.02\", --numbered", "steer: { by: control-file, confirm_within: 1s,"
        + " unconfirmed: log }\ncheckpoints: { watch: ckpt/step-*.json, keep: 3 }\n"
        + PLATEAU_GUARD));

    assertThat(r.outcome()).isEqualTo(RunOutcome.FINISHED);
    List<Map<String, Object>> audit = n.audit();
    assertThat(ofType(audit, "not-confirmed")).hasSize(1);
    assertThat(ofType(audit, "not-confirmed").get(0).get("fallback")).isEqualTo("none");
    assertThat(num(ofType(audit, "not-confirmed").get(0).get("waited_ms"))).isLessThan(2000);
    assertThat(ofType(audit, "launch")).hasSize(1);
  }

  @Test
  void trainerThatOnlyReadsLrAndResumeFlagsIsSteeredByRestartAndItsStepsContinue()
      throws Exception {
    Night n = new Night(tmp);
    // 40 ms a step: the plateau decision (step 40) comes well after the first checkpoints have
    // settled (500 ms unchanged), so the restart has a vault copy to resume from. At 20 ms a
    // step the decision raced the settling and the restart could start from scratch.
    Supervisor.Result r = n.run(n.rules("--steps, \"140\", --eval-every, \"10\", --delay,"
        + " \"0.04\", --numbered", "steer: { by: restart }\n"
        + "checkpoints: { watch: ckpt/step-*.json, keep: 20 }\n" + PLATEAU_GUARD));

    assertThat(r.outcome()).isEqualTo(RunOutcome.FINISHED);
    List<Map<String, Object>> audit = n.audit();
    List<Map<String, Object>> launches = ofType(audit, "launch");
    assertThat(launches).hasSize(2);
    Map<String, Object> second = launches.get(1);
    assertThat(second.get("reason")).isEqualTo("new rate by restart");
    assertThat(argv(second)).contains("0.05", "2"); // {learning_rate}, {attempt}
    Path resumedFrom = Path.of((String) second.get("resume_from"));
    assertThat(resumedFrom.toString()).startsWith(n.runDir.resolve(RunDirectory.VAULT).toString());
    long resumeStep = JSON.readTree(Files.readString(resumedFrom)).path("step").asLong();
    // The normalized metrics continue the step axis: after the restart the steps go on from the
    // checkpoint's step, to the end, and the rate column shows the new rate.
    List<String> metrics = Files.readAllLines(n.runDir.resolve(RunDirectory.METRICS));
    String last = metrics.get(metrics.size() - 1);
    assertThat(JSON.readTree(last).path("step").asLong()).isEqualTo(140);
    assertThat(JSON.readTree(last).path("lr").asDouble()).isEqualTo(0.05);
    assertThat(metrics).anyMatch(l -> JSON.readTree(l).path("step").asLong() == resumeStep + 1
        && JSON.readTree(l).path("lr").asDouble() == 0.05);
  }

  @Test
  void rewindUsesTheVaultCopyWrittenBeforeTheOnsetAfterTheTrainerOverwroteItsOwnFile()
      throws Exception {
    Night n = new Night(tmp);
    // The trainer rewrites ckpt/last.json every 25 steps (temp file + rename) and, at rate 0.1,
    // diverges from step 100 on: tenfold per 60 steps, so it writes one more last.json (step
    // 125) while already diverging, before the guard sees three times its best loss.
    Supervisor.Result r = n.run(n.rules("--steps, \"160\", --eval-every, \"25\", --delay,"
        + " \"0.03\", --diverge-at, \"100\", --growth-steps, \"60\"",
        "checkpoints: { watch: ckpt/last.json, keep: 10 }\n"
            + "guards:\n"
            + "  - name: blow-up\n"
            + "    when: { rises: { series: train, above_level: 3x, samples: 2, noise_units: 3 } }\n"
            + "    do: [ rewind, { scale: 0.25 } ]\n"
            + "limits:\n  learning_rate: { min: 0.001, max: 1.0 }\n  silence: 10s\n"));

    assertThat(r.outcome()).isEqualTo(RunOutcome.FINISHED);
    List<Map<String, Object>> audit = n.audit();
    Map<String, Object> decision = ofType(audit, "decision").get(0);
    long onset = num(((Map<?, ?>) decision.get("figures")).get("onset_step"));
    assertThat(onset).isBetween(95L, 105L);
    Map<String, Object> rewind = ofType(audit, "outcome").stream()
        .filter(o -> "rewind".equals(o.get("reason"))).findFirst().orElseThrow();
    Path vaultCopy = Path.of((String) rewind.get("resume_from"));
    long resumeStep = num(rewind.get("resume_step"));
    assertThat(vaultCopy.toString()).startsWith(n.runDir.resolve(RunDirectory.VAULT).toString());
    assertThat(rewind.get("checkpoint_original")).isEqualTo(n.work.resolve("ckpt/last.json")
        .toString());
    assertThat(resumeStep).isLessThanOrEqualTo(onset);
    // The vault copy still holds the pre-onset state, although the trainer has rewritten
    // last.json many times since (it ends at step 160); they are different files.
    long vaultContentStep = JSON.readTree(Files.readString(vaultCopy)).path("step").asLong();
    assertThat(vaultContentStep).isLessThanOrEqualTo(resumeStep).isLessThanOrEqualTo(onset);
    Path original = n.work.resolve("ckpt/last.json");
    assertThat(JSON.readTree(Files.readString(original)).path("step").asLong()).isEqualTo(150);
    assertThat(Files.readAttributes(vaultCopy, BasicFileAttributes.class).fileKey())
        .isNotEqualTo(Files.readAttributes(original, BasicFileAttributes.class).fileKey());
    // The second launch got the vault copy and the lowered rate; no second divergence.
    Map<String, Object> second = ofType(audit, "launch").get(1);
    assertThat(second.get("resume_from")).isEqualTo(vaultCopy.toString());
    assertThat(argv(second)).contains("0.025");
    assertThat(ofType(audit, "decision")).hasSize(1);
  }

  @Test
  void crashWithAnOutOfMemoryMessageRestartsFromTheLastVaultCheckpoint() throws Exception {
    Night n = new Night(tmp);
    // The crash comes 0.9 s after the step-60 checkpoint: longer than the ledger's settle time,
    // so that checkpoint counts even on a loaded machine (a file still changing never does).
    Supervisor.Result r = n.run(n.rules("--steps, \"110\", --eval-every, \"20\", --delay,"
        + " \"0.05\", --numbered, --crash-at, \"78\"",
        "checkpoints: { watch: ckpt/step-*.json, keep: 3 }\n"
            + "limits:\n  crash_restarts: 2\n  crash_backoff: 100ms\n  silence: 10s\n"));

    assertThat(r.outcome()).isEqualTo(RunOutcome.FINISHED);
    List<Map<String, Object>> audit = n.audit();
    Map<String, Object> crash = ofType(audit, "crash").get(0);
    assertThat(crash.get("exit_code")).isEqualTo(1);
    assertThat(String.valueOf(crash.get("out_of_memory"))).contains("MemoryError");
    Map<String, Object> second = ofType(audit, "launch").get(1);
    assertThat(second.get("reason")).isEqualTo("crash");
    assertThat(String.valueOf(second.get("resume_from")))
        .isEqualTo(n.runDir.resolve("vault/step-000000060--step-000060.json").toString());
  }

  @Test
  void silentTrainerIsStoppedAndRestartedFromACheckpoint() throws Exception {
    Night n = new Night(tmp);
    Supervisor.Result r = n.run(n.rules("--steps, \"110\", --eval-every, \"20\", --delay,"
        + " \"0.03\", --numbered, --hang-at, \"70\"",
        "checkpoints: { watch: ckpt/step-*.json, keep: 3 }\n"
            + "limits:\n  crash_restarts: 2\n  silence: 3s\n"));

    assertThat(r.outcome()).isEqualTo(RunOutcome.FINISHED);
    List<Map<String, Object>> audit = n.audit();
    Map<String, Object> silence = ofType(audit, "silence").get(0);
    assertThat(num(silence.get("limit_ms"))).isEqualTo(3000);
    Map<String, Object> restart = ofType(audit, "outcome").stream()
        .filter(o -> "hang".equals(o.get("reason"))).findFirst().orElseThrow();
    assertThat(num(restart.get("resume_step"))).isEqualTo(60);
    assertThat(ofType(audit, "launch")).hasSize(2);
    List<String> metrics = Files.readAllLines(n.runDir.resolve(RunDirectory.METRICS));
    assertThat(JSON.readTree(metrics.get(metrics.size() - 1)).path("step").asLong())
        .isEqualTo(110);
  }

  static List<String> argv(Map<String, Object> launch) {
    return ((List<?>) launch.get("argv")).stream().map(String::valueOf).toList();
  }
}
