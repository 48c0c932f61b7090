package dev.stepwarden.metrics;

import static org.assertj.core.api.Assertions.assertThat;

import java.nio.channels.FileChannel;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.nio.file.StandardCopyOption;
import java.nio.file.StandardOpenOption;
import java.time.Duration;
import java.util.ArrayList;
import java.util.List;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;

/**
 * A metrics file rewritten whole every epoch, the way a data frame's {@code to_csv(path)} does
 * it (open with truncation, write every row again) or a careful writer does it (a new file
 * renamed over the path): reading goes on after the rows already read. Polls by hand.
 */
class FileFollowerRewriteTest {
  @TempDir Path dir;

  private final List<String> got = new ArrayList<>();

  private FileFollower follower(Path f) {
    return new FileFollower(f, Duration.ofMillis(50), 4096, (l, cut) -> got.add(l));
  }

  private static String table(int epochs) {
    StringBuilder b = new StringBuilder("epoch,loss\n");
    for (int e = 1; e <= epochs; e++) {
      b.append(e).append(',').append(1.0 / e).append('\n');
    }
    return b.toString();
  }

  @Test
  void aTableRewrittenInPlaceEveryEpochIsReadOnceRowByRow() throws Exception {
    Path f = dir.resolve("history.csv");
    FileFollower ff = follower(f);
    for (int epoch = 1; epoch <= 60; epoch++) {
      Files.writeString(f, table(epoch)); // truncates, then writes every row again
      ff.poll();
    }
    assertThat(got).hasSize(61).startsWith("epoch,loss", "1,1.0").endsWith("60," + 1.0 / 60);
    assertThat(ff.rewrites()).isZero(); // same file, same inode: seen as appends or waits
    assertThat(ff.truncations()).isZero();
  }

  @Test
  void aRewriteCaughtHalfWayIsWaitedForNotReadAgainFromTheStart() throws Exception {
    Path f = dir.resolve("history.csv");
    FileFollower ff = follower(f);
    Files.writeString(f, table(3));
    ff.poll();
    assertThat(got).hasSize(4);
    String next = table(4);
    // The poll lands after the truncation, when only the header and a row are written again.
    try (FileChannel ch = FileChannel.open(f, StandardOpenOption.WRITE,
        StandardOpenOption.TRUNCATE_EXISTING)) {
      ch.write(java.nio.ByteBuffer.wrap(next.substring(0, 17).getBytes(StandardCharsets.UTF_8)));
      assertThat(ff.poll()).isZero();
      ch.write(java.nio.ByteBuffer.wrap(next.substring(17).getBytes(StandardCharsets.UTF_8)));
    }
    assertThat(ff.poll()).isEqualTo(1);
    assertThat(got).hasSize(5).endsWith("4,0.25");
    assertThat(ff.truncations()).isZero();
  }

  @Test
  void aGrownCopyRenamedOverThePathContinuesAfterWhatWasRead() throws Exception {
    Path f = dir.resolve("history.csv");
    FileFollower ff = follower(f);
    Files.writeString(f, table(2) + "3,0.33"); // the last row not finished yet
    ff.poll();
    assertThat(got).containsExactly("epoch,loss", "1,1.0", "2,0.5");
    Path tmp = dir.resolve("history.csv.tmp");
    Files.writeString(tmp, table(2) + "3,0.333\n4,0.25\n");
    Files.move(tmp, f, StandardCopyOption.REPLACE_EXISTING, StandardCopyOption.ATOMIC_MOVE);
    assertThat(ff.poll()).isEqualTo(2);
    assertThat(got).containsExactly("epoch,loss", "1,1.0", "2,0.5", "3,0.333", "4,0.25");
    assertThat(ff.rewrites()).isEqualTo(1);
    assertThat(ff.rotations()).isZero();
  }

  @Test
  void aReplacementThatDoesNotStartWithWhatWasReadIsANewFileReadFromItsStart()
      throws Exception {
    Path f = dir.resolve("history.csv");
    FileFollower ff = follower(f);
    Files.writeString(f, table(3));
    ff.poll();
    Path tmp = dir.resolve("history.csv.tmp");
    Files.writeString(tmp, "epoch,loss\n1,0.9\n"); // a new run's table: its rows differ
    Files.move(tmp, f, StandardCopyOption.REPLACE_EXISTING, StandardCopyOption.ATOMIC_MOVE);
    ff.poll();
    assertThat(got).hasSize(6).endsWith("epoch,loss", "1,0.9");
    assertThat(ff.rotations()).isEqualTo(1);
    assertThat(ff.rewrites()).isZero();
  }

  @Test
  void aCopyTruncateWithNewContentStillRestartsAtZero() throws Exception {
    Path f = dir.resolve("train.log");
    FileFollower ff = follower(f);
    Files.writeString(f, "step=1 loss=1\nstep=2 loss=0.9\n");
    ff.poll();
    Files.writeString(f, "step=3 loss=0.8\n"); // shorter, and not the old text
    ff.poll();
    assertThat(got).containsExactly("step=1 loss=1", "step=2 loss=0.9", "step=3 loss=0.8");
    assertThat(ff.truncations()).isEqualTo(1);
  }
}
