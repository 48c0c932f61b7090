package dev.stepwarden.demo;

import static org.assertj.core.api.Assertions.assertThat;

import java.io.IOException;
import java.io.UncheckedIOException;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.nio.file.StandardCopyOption;
import java.util.HashMap;
import java.util.List;
import java.util.Map;
import java.util.function.Consumer;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;
import tools.jackson.databind.JsonNode;

/**
 * The control-file protocol seen from the trainer. The file is written from the stdout hook, i.e.
 * right after the trainer printed a given step and before it polls for the next one, so the
 * switch point is exact without any sleeping.
 */
class DemoTrainerControlTest {
  @TempDir Path dir;

  private Path control() {
    return dir.resolve("control.json");
  }

  private Map<String, String> env() {
    return Map.of(DemoTrainer.CONTROL_ENV, control().toString());
  }

  /** Writes the file as the supervisor does: a temporary sibling renamed over the target. */
  private void replace(String json) {
    try {
      Path tmp = dir.resolve("control.json.tmp");
      Files.writeString(tmp, json, StandardCharsets.UTF_8);
      Files.move(tmp, control(), StandardCopyOption.REPLACE_EXISTING, StandardCopyOption.ATOMIC_MOVE);
    } catch (IOException e) {
      throw new UncheckedIOException(e);
    }
  }

  /** Writes in place, the way a careless writer leaves a half-written file. */
  private void overwrite(String text) {
    try {
      Files.writeString(control(), text, StandardCharsets.UTF_8);
    } catch (IOException e) {
      throw new UncheckedIOException(e);
    }
  }

  /** Runs {@code action} once, after the step line {@code step} was printed. */
  private static Consumer<String> afterStep(Map<Long, Runnable> actions) {
    Map<Long, Runnable> pending = new HashMap<>(actions);
    return line -> {
      if (line.contains("\"loss\"")) {
        long step = Long.parseLong(line.substring(8, line.indexOf(',')));
        Runnable a = pending.remove(step);
        if (a != null) {
          a.run();
        }
      }
    };
  }

  private TrainerRun train(Map<Long, Runnable> actions, String... extra) {
    String[] base = {"--lr", "0.1", "--epochs", "1", "--checkpoint-dir", dir.resolve("ckpt").toString()};
    String[] args = java.util.stream.Stream.concat(
        java.util.Arrays.stream(base), java.util.Arrays.stream(extra)).toArray(String[]::new);
    return TrainerRun.of(env(), afterStep(actions), args);
  }

  @Test
  void switchesTheRateOnTheNextStepAndReportsTheAppliedRevision() {
    TrainerRun run = train(Map.of(5L, () -> replace(
        "{\"revision\": 1, \"learning_rate\": 0.025, \"guard\": \"flat-validation\", \"at_step\": 5}")));

    assertThat(run.exitCode).as(run.stderr).isZero();
    List<JsonNode> steps = run.stepLines();
    for (JsonNode s : steps.subList(0, 5)) {
      assertThat(s.get("lr").asDouble()).isEqualTo(0.1);
      assertThat(s.has("applied_revision")).isFalse();
    }
    for (JsonNode s : steps.subList(5, steps.size())) {
      assertThat(s.get("lr").asDouble()).isEqualTo(0.025);
      assertThat(s.get("applied_revision").asLong()).isEqualTo(1);
    }
    assertThat(run.evalLines().get(0).get("applied_revision").asLong()).isEqualTo(1);
    assertThat(run.stderr).contains("control revision 1 applied before step 6").doesNotContain("warning");
  }

  @Test
  void skipsAHalfWrittenFileWithOneWarningAndAppliesTheNextValidRevision() {
    String partial = "{\"revision\": 2, \"learning_ra";
    TrainerRun run = train(Map.of(
        5L, () -> replace("{\"revision\": 1, \"learning_rate\": 0.05}"),
        10L, () -> overwrite(partial),
        12L, () -> { // same bad bytes again: no second warning
          overwrite("");
          overwrite(partial);
        },
        20L, () -> replace("{\"revision\": 2, \"learning_rate\": 0.01}"),
        30L, () -> replace("{\"revision\": 1, \"learning_rate\": 0.5}"))); // stale: ignored

    assertThat(run.exitCode).isZero();
    List<JsonNode> steps = run.stepLines();
    assertThat(steps.get(5).get("lr").asDouble()).isEqualTo(0.05);
    assertThat(steps.get(19).get("lr").asDouble()).isEqualTo(0.05);
    assertThat(steps.get(19).get("applied_revision").asLong()).isEqualTo(1);
    assertThat(steps.get(20).get("lr").asDouble()).isEqualTo(0.01);
    assertThat(steps.get(20).get("applied_revision").asLong()).isEqualTo(2);
    assertThat(steps.get(steps.size() - 1).get("lr").asDouble()).isEqualTo(0.01);
    assertThat(run.stderr.lines().filter(l -> l.contains("not valid JSON"))).hasSize(1);
  }

  @Test
  void warnsOncePerRevisionWhoseRateIsUnusable() {
    TrainerRun run = train(Map.of(
        3L, () -> replace("{\"revision\": 4, \"learning_rate\": -1}"),
        6L, () -> replace("{\"revision\": 4, \"learning_rate\": -1, \"note\": \"again\"}"),
        9L, () -> replace("{\"revision\": 5, \"learning_rate\": \"fast\"}")));

    assertThat(run.exitCode).isZero();
    assertThat(run.stepLines()).allSatisfy(s -> assertThat(s.get("lr").asDouble()).isEqualTo(0.1));
    List<String> warnings = run.stderr.lines().filter(l -> l.contains("warning")).toList();
    assertThat(warnings).hasSize(2);
    assertThat(warnings.get(0)).contains("revision 4").contains("positive finite number");
    assertThat(warnings.get(1)).contains("revision 5");
  }

  @Test
  void aMissingControlFileIsNormalAndSilent() {
    TrainerRun run = train(Map.of());

    assertThat(run.exitCode).isZero();
    assertThat(run.stderr).doesNotContain("warning");
    assertThat(run.stepLines()).noneMatch(s -> s.has("applied_revision"));
  }

  @Test
  void aFilePresentAtAFreshStartAppliesFromTheFirstStep() {
    replace("{\"revision\": 3, \"learning_rate\": 0.2}");
    TrainerRun run = train(Map.of());

    JsonNode first = run.stepLines().get(0);
    assertThat(first.get("lr").asDouble()).isEqualTo(0.2);
    assertThat(first.get("applied_revision").asLong()).isEqualTo(3);
  }

  @Test
  void onResumeTheRevisionPublishedForTheLaunchWinsOverTheCommandLineAsForAnyTrainer() {
    Path ckpt = dir.resolve("ckpt");
    TrainerRun first = TrainerRun.of("--epochs", "1", "--checkpoint-dir", ckpt.toString());
    assertThat(first.exitCode).isZero();
    // The supervisor publishes every launch's rate before the launch: that is the word in force.
    replace("{\"revision\": 2, \"learning_rate\": 0.3}");

    TrainerRun resumed = TrainerRun.of(env(),
        afterStep(Map.of(80L, () -> replace("{\"revision\": 3, \"learning_rate\": 0.07}"))),
        "--epochs", "2", "--lr", "0.15", "--checkpoint-dir", ckpt.toString(),
        "--resume", ckpt.resolve("last.ckpt").toString());

    List<JsonNode> steps = resumed.stepLines();
    assertThat(steps.get(0).get("step").asLong()).isEqualTo(76);
    assertThat(steps.get(0).get("lr").asDouble()).isEqualTo(0.3);
    assertThat(steps.get(0).get("applied_revision").asLong()).isEqualTo(2);
    assertThat(steps.get(5).get("lr").asDouble()).isEqualTo(0.07);
    assertThat(steps.get(5).get("applied_revision").asLong()).isEqualTo(3);
    assertThat(resumed.stderr).doesNotContain("predates");
  }
}
