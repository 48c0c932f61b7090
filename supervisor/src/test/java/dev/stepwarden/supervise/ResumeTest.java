package dev.stepwarden.supervise;

import static dev.stepwarden.supervise.Night.num;
import static dev.stepwarden.supervise.Night.ofType;
import static org.assertj.core.api.Assertions.assertThat;

import dev.stepwarden.audit.AuditReader;
import dev.stepwarden.cli.Main;
import java.io.PrintWriter;
import java.io.StringWriter;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.ArrayList;
import java.util.List;
import java.util.Map;
import java.util.concurrent.TimeUnit;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;
import tools.jackson.databind.JsonNode;
import tools.jackson.databind.json.JsonMapper;

/**
 * The supervisor itself dies (SIGKILL) or is pre-empted (SIGUSR1): it runs as its own JVM here,
 * started exactly as a user would ({@code stepwarden run ...}), and {@code run --resume}
 * continues in this JVM.
 */
class ResumeTest {
  private static final JsonMapper JSON = JsonMapper.builder().build();

  @TempDir
  Path tmp;

  private static String java() {
    return Path.of(System.getProperty("java.home"), "bin", "java").toString();
  }

  private static Process supervisorJvm(Path work, List<String> args) throws Exception {
    List<String> cmd = new ArrayList<>(List.of(java(), "-XX:+UseSerialGC", "-cp",
        System.getProperty("java.class.path"), "dev.stepwarden.cli.Main"));
    cmd.addAll(args);
    return new ProcessBuilder(cmd).directory(work.toFile())
        .redirectOutput(work.resolve("supervisor.out").toFile())
        .redirectErrorStream(true).start();
  }

  /** Waits until state.json lists at least {@code n} vault entries. */
  private static void awaitVaultEntries(Path runDir, int n, Process p) throws Exception {
    long deadline = System.nanoTime() + TimeUnit.SECONDS.toNanos(60);
    while (System.nanoTime() < deadline && p.isAlive()) {
      Path state = runDir.resolve(RunDirectory.STATE);
      if (Files.exists(state)) {
        int k = 0;
        for (JsonNode e : JSON.readTree(Files.readString(state)).path("ledger").path("entries")) {
          k += e.path("vault").isString() ? 1 : 0;
        }
        if (k >= n) {
          return;
        }
      }
      Thread.sleep(50);
    }
    throw new AssertionError("no " + n + " vault entries in time; supervisor alive: "
        + p.isAlive());
  }

  private static int resume(Path runDir) {
    StringWriter out = new StringWriter();
    StringWriter err = new StringWriter();
    int code = Main.execute(new String[] {"run", "--resume", runDir.toString(), "-q"},
        new PrintWriter(out, true), new PrintWriter(err, true));
    assertThat(err.toString()).doesNotContain("internal error");
    return code;
  }

  @Test
  void supervisorKilledWithSigkillIsResumedAndTheRunFinishesWithoutATornAuditRecord()
      throws Exception {
    Path work = Files.createDirectories(tmp.resolve("work"));
    Path runDir = tmp.resolve("run");
    Path rules = work.resolve("guards.yaml");
    Files.writeString(rules, "run:\n  name: demo-resume\n  learning_rate: 0.3\n"
        + "read:\n  format: json\n  series: { train: loss, validation: val_loss }\n"
        + "checkpoints: { watch: ckpt/step-*.ckpt, keep: 3 }\n"
        + "guards:\n  - name: flat\n"
        + "    when: { flattens: { series: validation, over: 50 } }\n    do: { scale: 0.5 }\n"
        + "limits:\n  silence: 30s\n");
    Process sup = supervisorJvm(work, List.of("run", "--rules", rules.toString(), "--run-dir",
        runDir.toString(), "-q", "--", java(), "-XX:+UseSerialGC", "-cp",
        System.getProperty("java.class.path"), "dev.stepwarden.demo.DemoTrainer", "--lr",
        "{learning_rate}", "--resume", "{resume_from}", "--epochs", "8", "--step-delay-ms",
        "8", "--checkpoint-dir", "ckpt"));
    try {
      awaitVaultEntries(runDir, 2, sup);
    } finally {
      sup.destroyForcibly(); // SIGKILL: no shutdown hook, no last record
      sup.waitFor(10, TimeUnit.SECONDS);
    }
    assertThat(sup.exitValue()).isEqualTo(137);
    long before = AuditReader.read(runDir.resolve(RunDirectory.AUDIT)).lastSeq();

    int code = resume(runDir);

    assertThat(code).isEqualTo(0);
    AuditReader.Contents c = AuditReader.read(runDir.resolve(RunDirectory.AUDIT));
    assertThat(c.tornLastLine()).isFalse();
    assertThat(c.badLines()).isEmpty();
    List<Map<String, Object>> audit = c.records();
    for (int i = 0; i < audit.size(); i++) {
      assertThat(num(audit.get(i).get("seq"))).isEqualTo(i + 1); // one unbroken sequence
    }
    Map<String, Object> resumed = ofType(audit, "run-resume").get(0);
    assertThat(num(resumed.get("seq"))).isGreaterThan(before);
    String from = (String) resumed.get("resume_from");
    assertThat(from).startsWith(runDir.resolve(RunDirectory.VAULT).toString());
    long step = num(resumed.get("resume_step"));
    assertThat(step % 75).isZero(); // the demo trainer saves once per 75-step epoch
    Map<String, Object> relaunch = ofType(audit, "launch").get(1);
    assertThat(relaunch.get("reason")).isEqualTo("resume");
    assertThat(relaunch.get("resume_from")).isEqualTo(from);
    assertThat(num(relaunch.get("attempt"))).isEqualTo(2);
    assertThat(ofType(audit, "run-end").get(0).get("outcome")).isEqualTo("finished");
    // The metrics file goes on to the last step (8 epochs of 75 steps).
    List<String> metrics = Files.readAllLines(runDir.resolve(RunDirectory.METRICS));
    assertThat(JSON.readTree(metrics.get(metrics.size() - 1)).path("step").asLong())
        .isEqualTo(600);
    JsonNode state = JSON.readTree(Files.readString(runDir.resolve(RunDirectory.STATE)));
    assertThat(state.path("ended").asBoolean()).isTrue();
    // A finished run cannot be resumed again.
    assertThat(resume(runDir)).isEqualTo(2);
  }

  @Test
  void sigusr1AsksTheTrainerForACheckpointExitsWithTheRequeueCodeAndResumeFinishes()
      throws Exception {
    Night n = new Night(tmp);
    Path rules = n.work.resolve("guards.yaml");
    Files.writeString(rules, "run:\n  name: toy-preempt\n  learning_rate: 0.1\n"
        + "  stop_grace: 2s\n"
        + "  command: [python3, -u, toy_trainer.py, --lr, \"{learning_rate}\", --resume,"
        + " \"{resume_from}\", --listen, --steps, \"150\", --eval-every, \"40\", --delay,"
        + " \"0.03\", --numbered]\n"
        + "read:\n  format: json\n  series: { train: loss, validation: val_loss }\n"
        + "checkpoints: { watch: ckpt/step-*.json, keep: 5 }\n"
        + "limits:\n  silence: 30s\n");
    Process sup = supervisorJvm(n.work, List.of("run", "--rules", rules.toString(), "--run-dir",
        n.runDir.toString(), "-q", "--preempt-wait", "10s"));
    int code;
    try {
      awaitVaultEntries(n.runDir, 1, sup);
      new ProcessBuilder("kill", "-s", "USR1", Long.toString(sup.pid())).start().waitFor();
      assertThat(sup.waitFor(30, TimeUnit.SECONDS)).isTrue();
      code = sup.exitValue();
    } finally {
      sup.destroyForcibly();
    }
    assertThat(code).isEqualTo(75);
    List<Map<String, Object>> audit = Night.audit(n.runDir);
    Map<String, Object> asked = ofType(audit, "preempt").get(0);
    assertThat(String.valueOf(asked.get("asked_by"))).contains("checkpoint_request");
    Map<String, Object> done = ofType(audit, "preempted").get(0);
    assertThat(done.get("new_checkpoint")).isEqualTo(true);
    long savedStep = num(done.get("resume_step"));
    // The trainer wrote a checkpoint on the request; the ledger has it under its exact step
    // (the trainer may have written a regular one after it while the supervisor waited).
    java.util.regex.Matcher m = java.util.regex.Pattern
        .compile("checkpoint written on request at step (\\d+)")
        .matcher(Files.readString(n.runDir.resolve(RunDirectory.STDERR)));
    assertThat(m.find()).isTrue();
    long requested = Long.parseLong(m.group(1));
    assertThat(ofType(audit, "checkpoint")).anyMatch(r -> num(r.get("step")) == requested
        && String.valueOf(r.get("path")).endsWith(String.format("step-%06d.json", requested)));
    assertThat(savedStep).isGreaterThanOrEqualTo(requested);
    assertThat(ofType(audit, "run-suspended")).hasSize(1);

    assertThat(resume(n.runDir)).isEqualTo(0);

    List<Map<String, Object>> after = Night.audit(n.runDir);
    Map<String, Object> resumed = ofType(after, "run-resume").get(0);
    assertThat(num(resumed.get("resume_step"))).isEqualTo(savedStep);
    assertThat(ofType(after, "run-end").get(0).get("outcome")).isEqualTo("finished");
  }
}
