package dev.stepwarden.supervise;

import static dev.stepwarden.supervise.Night.num;
import static dev.stepwarden.supervise.Night.ofType;
import static org.assertj.core.api.Assertions.assertThat;

import java.nio.file.Files;
import java.util.List;
import java.util.Map;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;
import tools.jackson.databind.JsonNode;
import tools.jackson.databind.json.JsonMapper;

/**
 * Real processes: a trainer that follows the control-file protocol, diverges from step 40 while
 * its rate is at least 0.06 (invented behaviour, our own scenario) and takes 1.5 s to exit on
 * TERM, printing diverging lines all the while. One rewind guard halves the rate from 0.1. The
 * blow-up must give exactly one decision and one rewind, and the relaunched trainer must run at
 * 0.05 from its very first step, under both ways of steering.
 */
class OneDecisionOneRewindTest {
  private static final JsonMapper JSON = JsonMapper.builder().build();

  private static final String GUARD = "checkpoints: { watch: ckpt/step-*.json, keep: 10 }\n"
      + "guards:\n"
      + "  - name: blow-up\n"
      + "    when: { rises: { series: train, above_level: 3x, samples: 2, noise_units: 3 } }\n"
      + "    do: [ rewind, { scale: 0.5 } ]\n"
      + "limits:\n  learning_rate: { min: 0.001, max: 1.0 }\n  rewinds: 5\n  silence: 20s\n";

  private static final String TRAINER = "--steps, \"90\", --eval-every, \"10\", --numbered,"
      + " --delay, \"0.05\", --diverge-at, \"40\", --stable-below, \"0.06\", --growth-steps,"
      + " \"10\", --term-delay, \"1.5\"";

  @TempDir
  java.nio.file.Path tmp;

  @Test
  void underControlFileSteeringWithTheHelper() throws Exception {
    oneDecisionOneRewind("--listen, ", "steer: { by: control-file, confirm_within: 10s }\n");
  }

  @Test
  void underControlFileSteeringByHand() throws Exception {
    oneDecisionOneRewind("--listen-by-hand, ",
        "steer: { by: control-file, confirm_within: 10s }\n");
  }

  @Test
  void underRestartSteering() throws Exception {
    oneDecisionOneRewind("--listen, ", "steer: { by: restart, confirm_within: 10s }\n");
  }

  private void oneDecisionOneRewind(String listen, String steer) throws Exception {
    Night n = new Night(tmp);
    Supervisor.Result r = n.run(n.rules(listen + TRAINER, steer + GUARD));

    List<Map<String, Object>> audit = n.audit();
    assertThat(r.outcome()).as("%s", audit).isEqualTo(RunOutcome.FINISHED);
    assertThat(ofType(audit, "decision")).hasSize(1);
    assertThat(ofType(audit, "outcome").stream().filter(o -> "rewind".equals(o.get("reason"))))
        .hasSize(1);
    List<Map<String, Object>> launches = ofType(audit, "launch");
    assertThat(launches).hasSize(2);
    assertThat(launches.get(1).get("learning_rate")).isEqualTo(0.05);
    // The second launch's rate is confirmed, from its own lines.
    assertThat(ofType(audit, "confirmed")).anyMatch(c -> "launch 2".equals(c.get("for"))
        && Double.valueOf(0.05).equals(c.get("learning_rate")));
    assertThat(ofType(audit, "not-confirmed")).isEmpty();
    // What the trainer itself printed: every line of attempt 2 at 0.05, from its first step,
    // and that step follows the rewind's checkpoint.
    long resumeStep = num(ofType(audit, "outcome").stream()
        .filter(o -> "rewind".equals(o.get("reason"))).findFirst().orElseThrow()
        .get("resume_step"));
    List<JsonNode> second = Files.readAllLines(n.runDir.resolve(RunDirectory.STDOUT)).stream()
        .filter(l -> l.startsWith("{") && l.contains("\"loss\"")).map(JSON::readTree)
        .filter(j -> j.path("attempt").asInt() == 2).toList();
    assertThat(second).isNotEmpty();
    assertThat(second.get(0).path("step").asLong()).isEqualTo(resumeStep + 1);
    assertThat(second).allMatch(j -> j.path("lr").asDouble() == 0.05);
    assertThat(second.get(second.size() - 1).path("step").asLong()).isEqualTo(90);
  }
}
