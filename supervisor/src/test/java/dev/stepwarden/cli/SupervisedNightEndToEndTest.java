package dev.stepwarden.cli;

import static org.assertj.core.api.Assertions.assertThat;

import dev.stepwarden.audit.AuditReader;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.List;
import java.util.Map;
import java.util.concurrent.TimeUnit;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;

/**
 * {@code stepwarden run} as a child process on the real demo trainer (a third process): the
 * audit log must show a plateau guard lowering the too-large rate through the control file,
 * with evidence, confirmed by the trainer.
 */
class SupervisedNightEndToEndTest {
  @Test
  void plateauGuardLowersAnOversizedRateThroughTheControlFile(@TempDir Path tmp)
      throws Exception {
    Path rules = tmp.resolve("night.yaml");
    Files.writeString(rules, String.join("\n",
        "run:",
        "  name: e2e",
        "  learning_rate: 3.0",
        "  stop_grace: 5s",
        "read: { format: json, series: { train: loss, validation: val_loss } }",
        "steer: { by: control-file, confirm_within: 20s }",
        "checkpoints: { watch: ckpt/step-*.ckpt }",
        "guards:",
        "  - name: flat-validation",
        "    when: { flattens: { series: validation, over: 3, gain_below: 1% } }",
        "    do: { scale: 0.5 }",
        "limits:",
        "  learning_rate: { min: 0.05, max: 3.0 }",
        "  silence: 1m",
        ""));
    Path runDir = tmp.resolve("run");
    Path out = tmp.resolve("out.txt");
    Process p = ChildJvm.stepwarden(tmp, out, "run", "--rules", rules.toString(), "--run-dir",
        runDir.toString(), "--quiet", "--", ChildJvm.java(), "-XX:+UseSerialGC", "-cp",
        System.getProperty("java.class.path"), "dev.stepwarden.demo.DemoTrainer", "--lr",
        "{learning_rate}", "--epochs", "16", "--checkpoint-dir", "ckpt").start();
    assertThat(p.waitFor(120, TimeUnit.SECONDS)).as("run finished").isTrue();
    String printed = Files.readString(out);
    assertThat(p.exitValue()).as(printed).isIn(0, 3);

    AuditReader.Contents audit = AuditReader.read(runDir.resolve("audit.jsonl"));
    assertThat(audit.tornLastLine()).isFalse();
    assertThat(audit.badLines()).isEmpty();
    List<Map<String, Object>> decisions = audit.records().stream()
        .filter(r -> "decision".equals(r.get("type"))).toList();
    assertThat(decisions).isNotEmpty();
    Map<String, Object> first = decisions.get(0);
    assertThat(first.get("guard")).isEqualTo("flat-validation");
    assertThat((String) first.get("evidence")).contains("has not improved by 1 % in 3 evaluations")
        .contains("trend test p =");
    assertThat(first.get("rate_before")).isEqualTo(3.0);
    assertThat(first.get("rate_after")).isEqualTo(1.5);
    @SuppressWarnings("unchecked")
    Map<String, Object> figures = (Map<String, Object>) first.get("figures");
    assertThat(figures).containsKeys("best", "best_step", "window");
    // The decision is on disk before its outcome, and the trainer confirmed the new rate.
    long seq = ((Number) first.get("seq")).longValue();
    assertThat(audit.records()).anySatisfy(r -> {
      assertThat(r.get("type")).isEqualTo("outcome");
      assertThat(((Number) r.get("decision_seq")).longValue()).isEqualTo(seq);
    });
    // The trainer confirms the live change it applied: this one, or a later one that replaced
    // it before the trainer's next poll (a loaded machine delivers the lines in bursts).
    assertThat(audit.records()).anySatisfy(r -> {
      assertThat(r.get("type")).isEqualTo("confirmed");
      assertThat(r.get("for")).isEqualTo("live change");
      assertThat(((Number) r.get("decision_seq")).longValue()).isGreaterThanOrEqualTo(seq);
    });
    assertThat(Files.readString(runDir.resolve("control.json"))).contains("\"guard\":\"flat-validation\"");
    Map<String, Object> end = audit.records().get(audit.records().size() - 1);
    assertThat(end.get("type")).isEqualTo("run-end");
    assertThat(printed).contains("audit log:").contains("run directory:");
    assertThat(Files.readAllLines(runDir.resolve("metrics.jsonl"))).isNotEmpty();
  }

  @Test
  void theRateProbeRampsTheTrainerAndTheRunStartsAtTheRateItPicked(@TempDir Path tmp)
      throws Exception {
    Path rules = probeRules(tmp, "format: json", "checkpoints: { watch: ckpt/step-*.ckpt }");
    Path runDir = tmp.resolve("run");
    Path out = tmp.resolve("out.txt");
    Process p = ChildJvm.stepwarden(tmp, out, "run", "--rules", rules.toString(), "--run-dir",
        runDir.toString(), "--quiet", "--", ChildJvm.java(), "-XX:+UseSerialGC", "-cp",
        System.getProperty("java.class.path"), "dev.stepwarden.demo.DemoTrainer", "--lr",
        "{learning_rate}", "--resume", "{resume_from}", "--epochs", "4", "--step-delay-ms", "2",
        "--checkpoint-dir", "ckpt").start();
    assertThat(p.waitFor(120, TimeUnit.SECONDS)).as("run finished").isTrue();
    assertThat(p.exitValue()).as(Files.readString(out)).isIn(0, 3);

    Map<String, Object> probe = assertTheProbeStartedTheRun(runDir);
    assertThat(((Number) probe.get("steps")).intValue()).isGreaterThan(33 * 4 / 2);
  }

  /** The two probe tests' guard file: {@code read} options and an optional extra line. */
  private static Path probeRules(Path tmp, String read, String extra) throws Exception {
    Path rules = tmp.resolve("probe.yaml");
    Files.writeString(rules, String.join("\n",
        "run: { name: probe-e2e, learning_rate: 0.01, stop_grace: 5s }",
        "read: { " + read + ", step: step, series: { train: loss, validation: val_loss } }",
        "steer: { by: control-file, confirm_within: 20s }",
        extra,
        "probe: { from: 1.0e-3, to: 10, steps: 33, hold: 4, pick: 0.5 }",
        "guards:",
        "  - name: flat-validation",
        "    when: { flattens: { series: validation, over: 3, gain_below: 1% } }",
        "    do: { scale: 0.5 }",
        "limits: { learning_rate: { min: 0.001, max: 3.0 }, silence: 1m }",
        ""));
    return rules;
  }

  /**
   * The audit shows a probe that found a range (it was fed the probe launch's lines), a real
   * launch at the rate it picked, and no guard decision before that launch; returns the probe
   * record.
   */
  private static Map<String, Object> assertTheProbeStartedTheRun(Path runDir) throws Exception {
    List<Map<String, Object>> records = AuditReader.read(runDir.resolve("audit.jsonl")).records();
    List<Map<String, Object>> launches = records.stream()
        .filter(r -> "launch".equals(r.get("type"))).toList();
    Map<String, Object> probe = records.stream().filter(r -> "probe".equals(r.get("type")))
        .findFirst().orElseThrow();
    assertThat(probe.get("found")).as(probe.toString()).isEqualTo(true);
    double picked = ((Number) probe.get("learning_rate")).doubleValue();
    // Where in the ramp it lands varies (the trainer does not wait for each rate: see the
    // control-quality benchmark); it must be a rate of the ramp within the limits.
    assertThat(picked).isBetween(1.0e-3, 3.0);
    assertThat(launches).hasSizeGreaterThanOrEqualTo(2);
    assertThat(launches.get(0).get("reason")).isEqualTo("rate probe");
    assertThat(launches.get(1).get("reason")).isEqualTo("start");
    assertThat(((Number) launches.get(1).get("learning_rate")).doubleValue()).isEqualTo(picked);
    long realStart = ((Number) launches.get(1).get("seq")).longValue();
    assertThat(records).filteredOn(r -> "decision".equals(r.get("type")))
        .allSatisfy(d -> assertThat(((Number) d.get("seq")).longValue()).isGreaterThan(realStart));
    return probe;
  }

  @Test
  void theRateProbeAlsoReadsAFollowedMetricsFile(@TempDir Path tmp) throws Exception {
    Path rules = probeRules(tmp, "file: train.jsonl, format: json", "");
    Path runDir = tmp.resolve("run");
    Path out = tmp.resolve("out.txt");
    // The trainer's metric lines go to a file only (its stdout is redirected there).
    String trainer = ChildJvm.java() + " -XX:+UseSerialGC -cp '"
        + System.getProperty("java.class.path") + "' dev.stepwarden.demo.DemoTrainer --lr \"$1\""
        + " --epochs 6 --step-delay-ms 5 > train.jsonl";
    Process p = ChildJvm.stepwarden(tmp, out, "run", "--rules", rules.toString(), "--run-dir",
        runDir.toString(), "--quiet", "--", "sh", "-c", trainer, "trainer",
        "{learning_rate}").start();
    assertThat(p.waitFor(120, TimeUnit.SECONDS)).as("run finished").isTrue();
    assertThat(p.exitValue()).as(Files.readString(out)).isIn(0, 3);

    assertTheProbeStartedTheRun(runDir);
  }

  @Test
  void nonFiniteTrainingLossGivesUpWithExitFour(@TempDir Path tmp) throws Exception {
    Path rules = tmp.resolve("nan.yaml");
    Files.writeString(rules, "run: { learning_rate: 0.1 }\n"
        + "read: { format: pairs, series: { train: loss } }\n");
    Path runDir = tmp.resolve("run");
    Process p = ChildJvm.stepwarden(tmp, tmp.resolve("out.txt"), "run", "--rules",
        rules.toString(), "--run-dir", runDir.toString(), "--quiet", "--", "python3", "-c",
        "import time\nfor i in range(3): print(f'step={i} loss=0.5', flush=True)\n"
            + "print('step=3 loss=nan', flush=True)\ntime.sleep(30)").start();
    assertThat(p.waitFor(60, TimeUnit.SECONDS)).isTrue();
    assertThat(p.exitValue()).as(Files.readString(tmp.resolve("out.txt"))).isEqualTo(4);
    AuditReader.Contents audit = AuditReader.read(runDir.resolve("audit.jsonl"));
    assertThat(audit.records()).anySatisfy(r -> {
      assertThat(r.get("type")).isEqualTo("decision");
      assertThat(r.get("ending")).isEqualTo("give_up");
      assertThat(r.get("step")).isEqualTo(3);
    });
  }
}
