package dev.stepwarden.supervise;

import static org.assertj.core.api.Assertions.assertThat;

import dev.stepwarden.checkpoints.CheckpointLedger;
import dev.stepwarden.rules.GuardFiles;
import java.io.ByteArrayOutputStream;
import java.io.PrintStream;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;

/** The checkpoint named for use is the one whose recorded validation is the run's best. */
class BestCheckpointTest {
  @TempDir
  Path tmp;

  @Test
  void withCheckpointsNamedByEpochAndTheBestValidationAtEpoch3Of8TheNamedOneHoldsEpoch3()
      throws Exception {
    // validation per epoch (invented): best 0.40 at epoch 3; each epoch's checkpoint is written
    // after its validation line, as most trainers do, and holds its epoch number
    Files.writeString(tmp.resolve("train.sh"), String.join("\n",
        "set -e; mkdir -p ckpt; s=0",
        "for v in 1:0.90 2:0.60 3:0.40 4:0.45 5:0.50 6:0.52 7:0.55 8:0.58; do",
        "  e=${v%%:*}; val=${v#*:}",
        "  for i in 1 2 3 4 5; do s=$((s+1)); echo \"{\\\"epoch\\\": $e, \\\"step\\\": $s,"
            + " \\\"loss\\\": 0.5}\"; done",
        "  echo \"{\\\"epoch\\\": $e, \\\"step\\\": $s, \\\"val_loss\\\": $val}\"",
        "  echo \"epoch $e\" > ckpt/.tmp && mv ckpt/.tmp ckpt/epoch-$e.pt",
        "  sleep 0.8",
        "done", ""));
    Path rules = tmp.resolve("night.yaml");
    Files.writeString(rules, "run:\n  command: [sh, train.sh]\n  learning_rate: 0.1\n"
        + "  workdir: " + tmp + "\n"
        + "checkpoints: { watch: 'ckpt/epoch-*.pt', keep: 10 }\n");
    Path runDir = tmp.resolve("run");
    Supervisor.Result r = new Supervisor(GuardFiles.load(rules), new RunOptions(runDir,
        true, null, new PrintStream(new ByteArrayOutputStream(), true, StandardCharsets.UTF_8)))
        .run();

    assertThat(r.outcome()).isEqualTo(RunOutcome.FINISHED);
    CheckpointLedger.Entry best = r.bestCheckpoint().orElseThrow();
    assertThat(Files.readString(best.usable()).strip()).isEqualTo("epoch 3");
    assertThat(best.validation()).isEqualTo(0.40);
    assertThat(r.bestValidation()).isEqualTo(0.40);
  }
}
