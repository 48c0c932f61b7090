package dev.stepwarden.checkpoints;

import static org.assertj.core.api.Assertions.assertThat;

import java.nio.file.Files;
import java.nio.file.Path;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;

/** {@code {run_dir}} in checkpoints.watch: each run of a sweep watches a folder of its own. */
class RunDirGlobTest {
  @TempDir Path tmp;

  @Test
  void runDirIsFilledAndTheAbsoluteGlobIsWatchedBelowIt() throws Exception {
    Path run = Files.createDirectories(tmp.resolve("runs/lr-0.1"));
    String watch = CheckpointLedger.fillRunDir("{run_dir}/ckpt/*.pt", run);
    assertThat(watch).isEqualTo(run + "/ckpt/*.pt");
    CheckpointLedger l = new CheckpointLedger(tmp.resolve("work"), watch);
    assertThat(l.scanRoot()).isEqualTo(run.resolve("ckpt"));
    Files.createDirectories(run.resolve("ckpt"));
    Files.writeString(run.resolve("ckpt/a.pt"), "mine");
    Files.createDirectories(tmp.resolve("runs/other/ckpt"));
    Files.writeString(tmp.resolve("runs/other/ckpt/b.pt"), "another run's");
    l.scan(1, 1, 1, true, 0);
    assertThat(l.scan(2, 1, 1, true, 1)).extracting(CheckpointLedger.Entry::path)
        .containsExactly(run.resolve("ckpt/a.pt"));
    assertThat(l.absoluteGlob()).isEqualTo(watch);
  }
}
