package dev.stepwarden.checkpoints;

import static org.assertj.core.api.Assertions.assertThat;
import static org.junit.jupiter.api.Assumptions.assumeTrue;

import java.nio.ByteBuffer;
import java.nio.channels.FileChannel;
import java.nio.file.Files;
import java.nio.file.Path;
import java.nio.file.StandardOpenOption;
import java.nio.file.attribute.FileTime;
import java.time.Instant;
import java.util.List;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;

/**
 * When a checkpoint counts as complete, and which step it gets. The scans' clock is passed in;
 * the writer probe reads this JVM's real {@code /proc/self/fd}.
 */
class CheckpointCompletenessTest {
  @TempDir Path work;

  private CheckpointLedger ledger(long settleMillis, boolean copyOnly) {
    return new CheckpointLedger(work, "ckpt/*.pt",
        new CheckpointVault(work.resolve("run/vault"), 5, copyOnly), settleMillis);
  }

  @Test
  void aFileStillOpenForWritingIsNeverTakenHoweverLongItStaysUnchanged() throws Exception {
    assumeTrue(Files.isDirectory(Path.of("/proc/self/fd")), "Linux /proc");
    CheckpointLedger l = ledger(500, true);
    long self = ProcessHandle.current().pid(); // this JVM plays the trainer's tree
    l.watchWriters(WriterProbe.ofTree(() -> self));
    Path p = work.resolve("ckpt/model.pt");
    Files.createDirectories(p.getParent());
    try (FileChannel ch = FileChannel.open(p, StandardOpenOption.CREATE_NEW,
        StandardOpenOption.WRITE)) {
      ch.write(ByteBuffer.wrap("first chunk of four".getBytes()));
      l.scan(10, 1, 1, true, 0);
      // A stall of a minute between chunks: unchanged far past the settle time, still open.
      assertThat(l.scan(10, 1, 1, true, 60_000)).isEmpty();
      assertThat(l.scan(10, 1, 1, true, 120_000)).isEmpty();
      ch.write(ByteBuffer.wrap(", the rest".getBytes()));
    }
    l.scan(11, 1, 1, true, 120_100); // closed now: the last change is seen
    // Two minutes in the making: the window is at its cap, two minutes of quiet.
    assertThat(l.scan(12, 1, 1, true, 200_000)).isEmpty();
    List<CheckpointLedger.Entry> e = l.scan(12, 1, 1, true, 240_100);
    assertThat(e).hasSize(1);
    assertThat(Files.readString(e.get(0).vault())).isEqualTo("first chunk of four, the rest");
    assertThat(e.get(0).sha256()).isEqualTo(CheckpointLedger.sha256(p));
    assertThat(e.get(0).step()).as("the step when it first appeared").isEqualTo(10);
  }

  @Test
  void theProbeSeesOnlyWritersNotReaders() throws Exception {
    assumeTrue(Files.isDirectory(Path.of("/proc/self/fd")), "Linux /proc");
    Path p = work.resolve("read-only.pt");
    Files.writeString(p, "x");
    WriterProbe probe = WriterProbe.ofTree(() -> ProcessHandle.current().pid());
    Object key = Files.readAttributes(p,
        java.nio.file.attribute.BasicFileAttributes.class).fileKey();
    try (FileChannel r = FileChannel.open(p, StandardOpenOption.READ)) {
      assertThat(r.isOpen()).isTrue();
      assertThat(probe.openForWriting()).doesNotContainKey(key);
    }
    try (FileChannel w = FileChannel.open(p, StandardOpenOption.APPEND)) {
      assertThat(w.isOpen()).isTrue();
      assertThat(probe.openForWriting()).containsEntry(key, true);
      // Seen from a probe whose trainer is another process: written, but not by ours.
      assertThat(WriterProbe.ofTree(() -> -1).openForWriting()).containsEntry(key, false);
    }
  }

  @Test
  void theWindowGrowsWithTheTimeAFileKeptChangingAndWithItsSize() {
    assertThat(CheckpointLedger.window(500, 10, 0)).isEqualTo(500);
    // Written over 3 s: a further 6 s of quiet is asked for.
    assertThat(CheckpointLedger.window(500, 10, 3_000)).isEqualTo(6_000);
    // 8 GiB: about 8 s.
    assertThat(CheckpointLedger.window(500, 8L << 30, 0)).isEqualTo(8_192);
    assertThat(CheckpointLedger.window(500, Long.MAX_VALUE, Long.MAX_VALUE / 4))
        .isEqualTo(CheckpointLedger.MAX_WINDOW_MILLIS);
  }

  @Test
  void aFileWrittenInChunksWithoutAProbeWaitsTwiceItsWritingTimeAfterTheLastChunk()
      throws Exception {
    CheckpointLedger l = ledger(500, true);
    Path p = work.resolve("ckpt/slow.pt");
    Files.createDirectories(p.getParent());
    long t = 0;
    for (int chunk = 1; chunk <= 4; chunk++, t += 1_000) {
      Files.writeString(p, "chunk" + chunk + ";", StandardOpenOption.CREATE,
          StandardOpenOption.APPEND);
      Files.setLastModifiedTime(p, FileTime.fromMillis(1_700_000_000_000L + t));
      assertThat(l.scan(chunk, 1, 1, true, t)).as("after chunk %d", chunk).isEmpty();
      if (chunk >= 2) { // a 1 s stall after a file that grew for a while is not its end
        assertThat(l.scan(chunk, 1, 1, true, t + 999)).isEmpty();
      }
    }
    // The last chunk came at 3 s, 3 s after the first: 6 s of quiet are needed.
    assertThat(l.scan(9, 1, 1, true, 3_000 + 5_999)).isEmpty();
    List<CheckpointLedger.Entry> e = l.scan(9, 1, 1, true, 3_000 + 6_000);
    assertThat(e).hasSize(1);
    assertThat(Files.readString(e.get(0).vault())).isEqualTo("chunk1;chunk2;chunk3;chunk4;");
  }

  @Test
  void anEpochNumberIsNeverAStepAndTheEntrySaysWhereItsStepCameFrom() throws Exception {
    CheckpointLedger l = ledger(0, false);
    l.scan(80, 1, 1, true, 0);
    Files.createDirectories(work.resolve("ckpt"));
    Files.writeString(work.resolve("ckpt/epoch-001.pt"), "e1"); // epoch 1 at step 100
    Files.writeString(work.resolve("ckpt/model_step120.pt"), "s"); // saved before we read 120
    Files.writeString(work.resolve("ckpt/iter-5.pt"), "i"); // behind the previous scan: no
    Files.writeString(work.resolve("ckpt/ckpt-90.pt"), "c"); // a bare number: only a hint
    l.scan(100, 1, 1, true, 1);
    List<CheckpointLedger.Entry> e = l.scan(130, 1, 1, true, 2);
    assertThat(e).extracting(x -> x.path().getFileName() + "@" + x.step() + " " + x.stepFrom())
        .containsExactlyInAnyOrder(
            "epoch-001.pt@100 " + CheckpointLedger.STEP_FROM_TRAINER,
            "model_step120.pt@120 " + CheckpointLedger.STEP_FROM_NAME,
            "iter-5.pt@100 " + CheckpointLedger.STEP_FROM_TRAINER,
            "ckpt-90.pt@100 " + CheckpointLedger.STEP_FROM_TRAINER);
  }

  @Test
  void aFileOlderThanTheRunsFirstLaunchIsNotTakenEvenWhenItAppearsLater() throws Exception {
    CheckpointLedger l = ledger(0, false);
    l.baseline();
    long launched = Instant.parse("2026-12-02T10:00:00Z").toEpochMilli();
    l.notBefore(launched);
    Path moved = work.resolve("ckpt/other-run.pt");
    Files.createDirectories(moved.getParent());
    Files.writeString(moved, "another run's weights, moved in");
    Files.setLastModifiedTime(moved, FileTime.fromMillis(launched - 3_600_000));
    l.scan(10, 1, 1, true, 0);
    assertThat(l.scan(11, 1, 1, true, 1)).isEmpty();
    Files.writeString(moved, "rewritten by this run"); // its time is now: taken
    l.scan(12, 1, 1, true, 2);
    assertThat(l.scan(13, 1, 1, true, 3)).hasSize(1);
  }

  @Test
  void aVaultCopyWhoseHashNoLongerMatchesFallsBackToTheNextHealthyCopy() throws Exception {
    CheckpointLedger l = ledger(0, true);
    Files.createDirectories(work.resolve("ckpt"));
    Files.writeString(work.resolve("ckpt/a.pt"), "step 10");
    l.scan(10, 1, 1, true, 0);
    CheckpointLedger.Entry first = l.scan(10, 1, 1, true, 1).get(0);
    Files.writeString(work.resolve("ckpt/b.pt"), "step 20");
    l.scan(20, 1, 1, true, 2);
    CheckpointLedger.Entry second = l.scan(20, 1, 1, true, 3).get(0);
    Files.writeString(second.vault(), "step 20, damaged on disk");
    assertThat(l.latestHealthyAtOrBefore(100)).contains(second);
    assertThat(l.verify(second)).isFalse();
    assertThat(l.latestHealthyAtOrBefore(100)).contains(first);
    assertThat(l.verify(first)).isTrue();
  }
}
