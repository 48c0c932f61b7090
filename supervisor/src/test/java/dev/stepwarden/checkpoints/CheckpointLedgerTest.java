package dev.stepwarden.checkpoints;

import static org.assertj.core.api.Assertions.assertThat;
import static org.assertj.core.api.Assertions.assertThatThrownBy;

import java.nio.file.Files;
import java.nio.file.Path;
import java.nio.file.StandardCopyOption;
import java.nio.file.attribute.BasicFileAttributes;
import java.util.List;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;
import org.junit.jupiter.params.ParameterizedTest;
import org.junit.jupiter.params.provider.ValueSource;

/** The ledger and vault on real files; the scan's clock is passed in, so no sleeping. */
class CheckpointLedgerTest {
  @TempDir
  Path work;

  private Path vaultDir() {
    return work.resolve("run/vault");
  }

  /** Writes like a careful trainer: a temporary file renamed over the target. */
  private static void writeByRename(Path p, String content) throws Exception {
    Files.createDirectories(p.getParent());
    Path tmp = p.resolveSibling("." + p.getFileName() + ".tmp");
    Files.writeString(tmp, content);
    Files.move(tmp, p, StandardCopyOption.REPLACE_EXISTING, StandardCopyOption.ATOMIC_MOVE);
  }

  @Test
  void walksOnlyTheGlobsFolderSoALoopElsewhereInTheWorkdirCannotHideCheckpoints()
      throws Exception {
    // A symbolic-link loop in a data folder made a walk of the whole workdir fail every scan.
    Files.createDirectories(work.resolve("data"));
    Files.createSymbolicLink(work.resolve("data/loop"), work);
    writeByRename(work.resolve("ckpt/a.pt"), "A");
    CheckpointLedger l = new CheckpointLedger(work, "ckpt/*.pt");
    assertThat(l.scanRoot()).isEqualTo(work.resolve("ckpt"));
    l.scan(10, 1.0, 1.0, true, 0);
    List<CheckpointLedger.Entry> settled = l.scan(11, 1.0, 1.0, true, 1);
    assertThat(settled).extracting(CheckpointLedger.Entry::path)
        .containsExactly(work.resolve("ckpt/a.pt"));
  }

  @Test
  void stepIsTheStepWhenTheFileFirstAppearedNotWhenItSettled() throws Exception {
    CheckpointLedger l = new CheckpointLedger(work, "ckpt/*.pt", null, 500);
    writeByRename(work.resolve("ckpt/last.pt"), "v1");
    l.scan(100, 0.5, 0.6, true, 0);
    l.scan(140, 0.5, 0.6, true, 200); // unchanged, but not yet for the settle time
    List<CheckpointLedger.Entry> e = l.scan(180, 9.0, 9.0, true, 600);
    assertThat(e).hasSize(1);
    assertThat(e.get(0).step()).isEqualTo(100);
    assertThat(e.get(0).train()).isEqualTo(0.5); // the figures of the first sighting too
  }

  @ParameterizedTest(name = "copy only: {0}")
  @ValueSource(booleans = {false, true})
  void aFileReplacedBetweenTheSettleCheckAndTheLinkIsKeptUnderTheStepAtWhichItAppeared(
      boolean copyOnly) throws Exception {
    // The window is real (a loaded machine hit it end to end: the vault's "step 80" held the
    // bytes of step 100); the seam puts the trainer's rename exactly inside it.
    CheckpointVault vault = new CheckpointVault(vaultDir(), 5, copyOnly);
    CheckpointLedger l = new CheckpointLedger(work, "ckpt/*.pt", vault, 0);
    Path ckpt = work.resolve("ckpt/last.pt");
    writeByRename(ckpt, "weights at step 80");
    l.scan(80, 1.0, 1.0, true, 0);
    l.beforeKeep = () -> {
      try {
        writeByRename(ckpt, "weights at step 100, a longer file");
      } catch (Exception e) {
        throw new IllegalStateException(e);
      }
    };
    assertThat(l.scan(100, 1.0, 1.0, true, 1))
        .as("the step-80 file settled, but the vault got the step-100 file: keep nothing yet")
        .isEmpty();
    l.beforeKeep = () -> {};
    List<CheckpointLedger.Entry> e = l.scan(120, 1.0, 1.0, true, 2);
    assertThat(e).hasSize(1);
    assertThat(e.get(0).step()).isEqualTo(100);
    assertThat(Files.readString(e.get(0).vault())).isEqualTo("weights at step 100, a longer file");
    try (var files = Files.list(vaultDir())) {
      assertThat(files).as("the mismatched link was taken back").hasSize(1);
    }
  }

  @Test
  void numberInTheFileNameIsTheStepOnlyWhenItLiesBetweenThePreviousScanAndNow()
      throws Exception {
    CheckpointLedger l = new CheckpointLedger(work, "ckpt/*.pt");
    l.scan(70, 1, 1, true, 0);
    writeByRename(work.resolve("ckpt/step-000075.pt"), "x");
    writeByRename(work.resolve("ckpt/epoch-3.pt"), "y"); // an epoch number, not a step
    l.scan(90, 1, 1, true, 1);
    List<CheckpointLedger.Entry> e = l.scan(95, 1, 1, true, 2);
    assertThat(e).extracting(x -> x.path().getFileName().toString() + "@" + x.step())
        .containsExactlyInAnyOrder("step-000075.pt@75", "epoch-3.pt@90");
  }

  @Test
  void leftoversFromAnEarlierRunAreIgnoredUntilTheyChange() throws Exception {
    writeByRename(work.resolve("ckpt/old.pt"), "old");
    CheckpointLedger l = new CheckpointLedger(work, "ckpt/*.pt");
    l.baseline();
    l.scan(5, 1, 1, true, 0);
    assertThat(l.scan(6, 1, 1, true, 1)).isEmpty();
    assertThat(l.latestHealthyAtOrBefore(Long.MAX_VALUE)).isEmpty();
  }

  @Test
  void vaultCopySurvivesTheTrainerReplacingAndDeletingItsFile() throws Exception {
    CheckpointLedger l = new CheckpointLedger(work, "ckpt/*.pt",
        new CheckpointVault(vaultDir(), 3, false), 0);
    Path last = work.resolve("ckpt/last.pt");
    writeByRename(last, "epoch 1");
    l.scan(75, 1, 1, true, 0);
    CheckpointLedger.Entry e = l.scan(80, 1, 1, true, 1).get(0);
    assertThat(e.vault()).startsWith(vaultDir());
    // A hard link: the same file, no bytes copied.
    assertThat(Files.readAttributes(e.vault(), BasicFileAttributes.class).fileKey())
        .isEqualTo(Files.readAttributes(last, BasicFileAttributes.class).fileKey());
    writeByRename(last, "epoch 2, diverged");
    Files.delete(last);
    assertThat(Files.readString(e.vault())).isEqualTo("epoch 1");
    assertThat(l.verify(e)).isTrue();
    assertThat(l.latestHealthyAtOrBefore(100)).map(CheckpointLedger.Entry::usable)
        .contains(e.vault());
  }

  @Test
  void inPlaceOverwriteOfALinkedFileIsDetectedAndTheVaultCopiesFromThenOn() throws Exception {
    CheckpointVault v = new CheckpointVault(vaultDir(), 3, false);
    CheckpointLedger l = new CheckpointLedger(work, "ckpt/*.pt", v, 0);
    Path last = work.resolve("ckpt/last.pt");
    writeByRename(last, "epoch 1");
    l.scan(75, 1, 1, true, 0);
    CheckpointLedger.Entry first = l.scan(76, 1, 1, true, 1).get(0);
    Files.writeString(last, "epoch 2 written in place, longer"); // same inode
    l.scan(150, 1, 1, true, 2);
    assertThat(l.drainNotices()).singleElement()
        .satisfies(n -> assertThat(n.type()).isEqualTo("vault-warning"));
    assertThat(l.entries().get(0).state()).isEqualTo(CheckpointLedger.DAMAGED);
    assertThat(v.copying()).isTrue();
    CheckpointLedger.Entry second = l.scan(151, 1, 1, true, 3).get(0);
    assertThat(Files.readAttributes(second.vault(), BasicFileAttributes.class).fileKey())
        .isNotEqualTo(Files.readAttributes(last, BasicFileAttributes.class).fileKey());
    assertThat(l.latestHealthyAtOrBefore(100)).isEmpty(); // the damaged one is never used
    assertThat(first.step()).isEqualTo(75);
  }

  @Test
  void pruneKeepsTheBestAndTheLatestKAndNeverTouchesTheTrainersFiles() throws Exception {
    CheckpointLedger l = new CheckpointLedger(work, "ckpt/*.pt",
        new CheckpointVault(vaultDir(), 2, false), 0);
    double[] validation = {0.9, 0.2, 0.7, 0.6, 0.5};
    for (int i = 0; i < validation.length; i++) {
      Path p = work.resolve("ckpt/step-" + (i + 1) * 100 + ".pt");
      writeByRename(p, "state " + i);
      l.scan((i + 1) * 100, 1, validation[i], true, 2L * i);
      l.scan((i + 1) * 100 + 1, 1, validation[i], true, 2L * i + 1);
      l.prune();
    }
    List<Long> kept = l.entries().stream().filter(e -> e.vault() != null)
        .map(CheckpointLedger.Entry::step).sorted().toList();
    assertThat(kept).containsExactly(200L, 400L, 500L); // best (0.2) + latest 2
    try (var s = Files.list(vaultDir())) {
      assertThat(s.count()).isEqualTo(3);
    }
    try (var s = Files.list(work.resolve("ckpt"))) {
      assertThat(s.filter(p -> p.toString().endsWith(".pt")).count()).isEqualTo(5);
    }
    assertThatThrownBy(() -> new CheckpointVault(vaultDir(), 2, false)
        .remove(work.resolve("ckpt/step-100.pt"))).isInstanceOf(IllegalArgumentException.class);
  }

  @Test
  void rewindLeavesTheAbandonedBranchOutOfLaterRewinds() throws Exception {
    CheckpointLedger l = new CheckpointLedger(work, "ckpt/*.pt",
        new CheckpointVault(vaultDir(), 5, false), 0);
    for (int step : new int[] {100, 200, 300}) {
      writeByRename(work.resolve("ckpt/step-" + step + ".pt"), "s" + step);
      l.scan(step, 1, 1, true, step);
      l.scan(step + 1, 1, 1, true, step + 1);
    }
    assertThat(l.abandonAfter(100)).isEqualTo(2);
    assertThat(l.latestHealthyAtOrBefore(250)).map(CheckpointLedger.Entry::step).contains(100L);
  }

  @Test
  void theCopyARunningTrainerResumedFromIsNotPrunedAndLateFilesOfTheOldBranchAreDropped()
      throws Exception {
    CheckpointLedger l = new CheckpointLedger(work, "ckpt/*.pt",
        new CheckpointVault(vaultDir(), 1, false), 0);
    writeByRename(work.resolve("ckpt/step-100.pt"), "s100");
    l.scan(100, 1, 1, true, 0);
    CheckpointLedger.Entry target = l.scan(101, 1, 1, true, 1).get(0);
    writeByRename(work.resolve("ckpt/step-150.pt"), "s150"); // the old trainer, seen once
    l.scan(150, 1, 1, true, 2);
    l.abandonAfter(100);
    l.inUse(target.vault());
    assertThat(l.scan(101, 1, 1, true, 3)).isEmpty(); // step-150 belongs to the old branch
    for (int step : new int[] {110, 120}) {
      writeByRename(work.resolve("ckpt/step-" + step + ".pt"), "s" + step);
      l.scan(step, 1, 1, true, step);
      l.scan(step + 1, 1, 1, true, step + 1);
      l.prune();
    }
    assertThat(Files.exists(target.vault())).isTrue();
  }
}
