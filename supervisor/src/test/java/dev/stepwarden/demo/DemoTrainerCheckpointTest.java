package dev.stepwarden.demo;

import static org.assertj.core.api.Assertions.assertThat;

import java.nio.file.Files;
import java.nio.file.Path;
import java.util.List;
import java.util.stream.Stream;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;
import org.junit.jupiter.params.ParameterizedTest;
import org.junit.jupiter.params.provider.ValueSource;
import tools.jackson.databind.JsonNode;

class DemoTrainerCheckpointTest {
  private static final int STEPS_PER_EPOCH = 75; // 2400 training rows / batch 32

  @TempDir Path dir;

  @ParameterizedTest(name = "momentum {0}")
  @ValueSource(strings = {"0", "0.9"})
  void resumeContinuesTheStepCountAndReproducesTheUninterruptedWeights(String momentum)
      throws Exception {
    Path straight = dir.resolve("straight");
    Path split = dir.resolve("split");
    TrainerRun whole = TrainerRun.of("--epochs", "4", "--lr", "0.05", "--momentum", momentum,
        "--checkpoint-dir", straight.toString());
    TrainerRun firstHalf = TrainerRun.of("--epochs", "2", "--lr", "0.05", "--momentum", momentum,
        "--checkpoint-dir", split.toString());
    TrainerRun secondHalf = TrainerRun.of("--epochs", "4", "--checkpoint-dir", split.toString(),
        "--resume", split.resolve("last.ckpt").toString());

    assertThat(List.of(whole.exitCode, firstHalf.exitCode, secondHalf.exitCode))
        .as(secondHalf.stderr).containsOnly(0);
    List<JsonNode> resumedSteps = secondHalf.stepLines();
    assertThat(resumedSteps.get(0).get("step").asLong()).isEqualTo(2 * STEPS_PER_EPOCH + 1);
    assertThat(resumedSteps.get(0).get("epoch").asLong()).isEqualTo(3);
    assertThat(resumedSteps.get(0).get("lr").asDouble()).isEqualTo(0.05); // the checkpoint's rate
    // the resumed lines are exactly the second half of the uninterrupted run
    assertThat(secondHalf.lines).isEqualTo(whole.lines.subList(firstHalf.lines.size(), whole.lines.size()));

    Checkpoint a = Checkpoint.read(straight.resolve("last.ckpt"));
    Checkpoint b = Checkpoint.read(split.resolve("last.ckpt"));
    assertThat(b.step()).isEqualTo(a.step()).isEqualTo(4 * STEPS_PER_EPOCH);
    assertThat(b.params()).containsExactly(a.params());
    assertThat(b.velocity()).containsExactly(a.velocity());
    try (Stream<Path> files = Files.list(split)) {
      assertThat(files.map(p -> p.getFileName().toString()))
          .containsExactlyInAnyOrder("last.ckpt", "step-000075.ckpt", "step-000150.ckpt",
              "step-000225.ckpt", "step-000300.ckpt");
    }
  }

  @Test
  void resumeTakesTheCommandLineRateWhenGiven() {
    TrainerRun.of("--epochs", "1", "--lr", "0.05", "--checkpoint-dir", dir.toString());
    TrainerRun resumed = TrainerRun.of("--epochs", "2", "--lr", "0.0125",
        "--checkpoint-dir", dir.toString(), "--resume", dir.resolve("last.ckpt").toString());

    assertThat(resumed.stepLines()).allSatisfy(s -> assertThat(s.get("lr").asDouble()).isEqualTo(0.0125));
  }

  @Test
  void skipBatchesAdvancesTheDataWithoutCountingSteps() throws Exception {
    TrainerRun.of("--epochs", "2", "--checkpoint-dir", dir.toString());
    Checkpoint before = Checkpoint.read(dir.resolve("last.ckpt"));
    TrainerRun skipped = TrainerRun.of("--epochs", "4", "--checkpoint-dir", dir.toString(),
        "--resume", dir.resolve("last.ckpt").toString(), "--skip-batches", "10");

    List<JsonNode> steps = skipped.stepLines();
    assertThat(steps.get(0).get("step").asLong()).isEqualTo(151);
    assertThat(steps).hasSize(2 * STEPS_PER_EPOCH - 10);
    assertThat(steps.get(steps.size() - 1).get("step").asLong()).isEqualTo(4 * STEPS_PER_EPOCH - 10);
    Checkpoint after = Checkpoint.read(dir.resolve("last.ckpt"));
    assertThat(after.cursor()).isEqualTo(4 * STEPS_PER_EPOCH);
    assertThat(after.step()).isEqualTo(before.step() + 2 * STEPS_PER_EPOCH - 10);
    // epoch ends follow the data cursor: evaluations at steps 215 and 290
    assertThat(skipped.evalLines()).extracting(n -> n.get("step").asLong()).containsExactly(215L, 290L);
  }

  @Test
  void aDamagedCheckpointIsRefusedWithExitOneAndNoStackTrace() throws Exception {
    TrainerRun.of("--epochs", "1", "--checkpoint-dir", dir.toString());
    Path last = dir.resolve("last.ckpt");
    byte[] bytes = Files.readAllBytes(last);
    bytes[bytes.length / 2] ^= 0x10;
    Files.write(last, bytes);

    TrainerRun run = TrainerRun.of("--epochs", "2", "--checkpoint-dir", dir.toString(),
        "--resume", last.toString());

    assertThat(run.exitCode).isEqualTo(1);
    assertThat(run.stderr).contains("checksum").doesNotContain("Exception").doesNotContain("\tat ");
    assertThat(run.lines).isEmpty();
  }

  @Test
  void aMissingCheckpointIsAnIoFailure() {
    TrainerRun run = TrainerRun.of("--resume", dir.resolve("nope.ckpt").toString());
    assertThat(run.exitCode).isEqualTo(1);
    assertThat(run.stderr).contains("nope.ckpt");
  }

  @Test
  void aCheckpointFromAnotherNetworkShapeIsAUsageError() {
    TrainerRun.of("--epochs", "1", "--hidden", "8", "--checkpoint-dir", dir.toString());
    TrainerRun run = TrainerRun.of("--epochs", "2", "--hidden", "16",
        "--resume", dir.resolve("last.ckpt").toString());

    assertThat(run.exitCode).isEqualTo(2);
    assertThat(run.stderr).contains("--hidden 16 differs from the checkpoint's 8");
  }

  @Test
  void anUnwritableCheckpointDirectoryExitsOneWithAPlainMessage() throws Exception {
    Path file = Files.writeString(dir.resolve("not-a-dir"), "x");
    TrainerRun run = TrainerRun.of("--epochs", "1", "--checkpoint-dir", file.resolve("ckpt").toString());

    assertThat(run.exitCode).isEqualTo(1);
    assertThat(run.stderr).startsWith("demo trainer: I/O failure: cannot create checkpoint directory")
        .contains("not-a-dir").doesNotContain("\tat ");
  }

  @Test
  void checkpointBytesRoundTripEveryField() throws Exception {
    Checkpoint c = new Checkpoint(-7, 16, "csv:/data/x.csv", new int[] {3, 5, 2}, 41, 44, 0.025,
        0.9, 6, new double[] {1.5, Double.NaN, -0.0}, new double[] {0, 1, 2});
    Path file = dir.resolve("x.ckpt");
    Checkpoint.writeAtomically(file, c.toBytes());
    Checkpoint back = Checkpoint.read(file);

    assertThat(back.seed()).isEqualTo(-7);
    assertThat(back.batch()).isEqualTo(16);
    assertThat(back.dataSource()).isEqualTo("csv:/data/x.csv");
    assertThat(back.sizes()).containsExactly(3, 5, 2);
    assertThat(back.step()).isEqualTo(41);
    assertThat(back.cursor()).isEqualTo(44);
    assertThat(back.learningRate()).isEqualTo(0.025);
    assertThat(back.momentum()).isEqualTo(0.9);
    assertThat(back.controlRevision()).isEqualTo(6);
    assertThat(back.params()).containsExactly(1.5, Double.NaN, -0.0);
    assertThat(back.velocity()).containsExactly(0, 1, 2);
    assertThat(dir.resolve(".x.ckpt.tmp")).doesNotExist();
  }
}
