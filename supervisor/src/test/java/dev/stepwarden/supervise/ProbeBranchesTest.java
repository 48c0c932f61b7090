package dev.stepwarden.supervise;

import static dev.stepwarden.supervise.Night.num;
import static dev.stepwarden.supervise.Night.ofType;
import static org.assertj.core.api.Assertions.assertThat;

import java.util.List;
import java.util.Map;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;

/**
 * Real processes: the rate probe and the check of its pick on a trainer that follows the control
 * file through the shipped helper (noisy gradient descent on a quadratic, stable below rate 2:
 * {@code controller/quadratic_trainer.py}).
 */
class ProbeBranchesTest {
  @TempDir
  java.nio.file.Path tmp;

  private Night night() throws Exception {
    Night n = new Night(tmp);
    Night.copy("/controller/quadratic_trainer.py", n.work.resolve("quadratic_trainer.py"));
    return n;
  }

  private static String rules(Night n, String extra, String probe) {
    return "run:\n  name: quadratic\n  workdir: " + n.work + "\n  learning_rate: 0.01\n"
        + "  stop_grace: 2s\n  command: [python3, -u, quadratic_trainer.py, --lr,"
        + " \"{learning_rate}\"" + extra + "]\n"
        + "read: { from: stdout, format: json, step: step, series: { train: loss } }\n"
        + "steer: { by: control-file, confirm_within: 10s }\n"
        + "probe: " + probe + "\n"
        + "limits: { learning_rate: { min: 0.001, max: 10 }, silence: 30s }\n";
  }

  @Test
  void thePickIsCheckedByThreeBranchesAndTheRunStartsAtTheKeptRate() throws Exception {
    Night n = night();
    java.nio.file.Path f = tmp.resolve("g.yaml");
    java.nio.file.Files.writeString(f, rules(n, "", "{ from: 1.0e-3, to: 10, steps: 25,"
        + " hold: 3, pick: 0.5, branch: 24 }"));
    Supervisor.Result r = n.run(dev.stepwarden.rules.GuardFiles.load(f));
    List<Map<String, Object>> audit = n.audit();
    assertThat(r.outcome()).as("%s", audit).isEqualTo(RunOutcome.FINISHED);

    Map<String, Object> probe = ofType(audit, "probe").get(0);
    assertThat(probe.get("found")).as("%s", probe).isEqualTo(true);
    double pick = ((Number) probe.get("learning_rate")).doubleValue();
    Map<String, Object> b = ofType(audit, "branches").get(0);
    @SuppressWarnings("unchecked")
    List<Map<String, Object>> rows = (List<Map<String, Object>>) b.get("branches");
    assertThat(rows).extracting(m -> ((Number) m.get("learning_rate")).doubleValue())
        .containsExactly(Math.max(0.001, pick / 2), pick, Math.min(10, pick * 2));
    long steps = 0;
    for (Map<String, Object> row : rows) {
      // a branch ends after its 24 samples, or sooner when its loss turned non-finite
      assertThat(num(row.get("steps"))).isBetween(1L, 24L + 5);
      steps += num(row.get("steps"));
    }
    assertThat(num(b.get("steps"))).isEqualTo(steps);
    double kept = ((Number) b.get("learning_rate")).doubleValue();
    // Gradient descent on this quadratic diverges above rate 2 (max curvature 1): a branch
    // there is never kept.
    assertThat(kept).isIn(rows.stream().map(m -> ((Number) m.get("learning_rate"))
        .doubleValue()).toArray()).isLessThan(2.0);
    List<Map<String, Object>> launches = ofType(audit, "launch");
    assertThat(launches).extracting(l -> l.get("reason")).containsExactly("rate probe",
        "rate branch", "rate branch", "rate branch", "start");
    assertThat(((Number) launches.get(4).get("learning_rate")).doubleValue()).isEqualTo(kept);
    assertThat(ofType(audit, "decision")).isEmpty();
  }

  @Test
  void aProbeThatReadsNoTrainingLossEndsTheRunNamingTheKey() throws Exception {
    Night n = night();
    java.nio.file.Path f = tmp.resolve("g.yaml");
    java.nio.file.Files.writeString(f, rules(n, ", --no-loss, --steps, \"60\"",
        "{ from: 1.0e-3, to: 10, steps: 25, hold: 3, pick: 0.5, branch: 24 }"));
    Supervisor.Result r = n.run(dev.stepwarden.rules.GuardFiles.load(f));
    List<Map<String, Object>> audit = n.audit();
    assertThat(r.outcome()).isEqualTo(RunOutcome.GAVE_UP);
    assertThat(r.reason()).contains("read no training loss").contains("read.series.train")
        .contains("(loss)");
    assertThat(ofType(audit, "launch")).hasSize(1);
    assertThat(ofType(audit, "branches")).isEmpty();
  }
}
