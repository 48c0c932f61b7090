package dev.stepwarden.metrics;

import static org.assertj.core.api.Assertions.assertThat;

import java.io.IOException;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.nio.file.StandardOpenOption;
import java.time.Duration;
import java.util.ArrayList;
import java.util.List;
import java.util.concurrent.CopyOnWriteArrayList;
import java.util.concurrent.TimeUnit;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;

/** Real files in a temporary directory; polls are driven by hand, so no test sleeps. */
class FileFollowerTest {
  @TempDir
  Path dir;

  private final List<String> got = new ArrayList<>();
  private final List<Boolean> cuts = new ArrayList<>();

  private FileFollower follower(Path f, int limit) {
    return new FileFollower(f, Duration.ofMillis(50), limit, (l, cut) -> {
      got.add(l);
      cuts.add(cut);
    });
  }

  private static void append(Path f, String text) throws IOException {
    Files.writeString(f, text, StandardCharsets.UTF_8, StandardOpenOption.CREATE,
        StandardOpenOption.APPEND);
  }

  @Test
  void deliversOnlyCompleteLinesAndHoldsAPartialOneUntilItsNewline() throws Exception {
    Path f = dir.resolve("m.jsonl");
    append(f, "{\"step\":1}\n{\"st");
    FileFollower ff = follower(f, 1024);
    assertThat(ff.poll()).isEqualTo(1);
    append(f, "ep\":2}\r\n");
    ff.poll();
    assertThat(got).containsExactly("{\"step\":1}", "{\"step\":2}");
  }

  @Test
  void waitsForAFileCreatedLate() throws Exception {
    Path f = dir.resolve("later.csv");
    FileFollower ff = follower(f, 1024);
    assertThat(ff.poll()).isZero();
    append(f, "step,val_loss\n10,0.5\n");
    ff.poll();
    assertThat(got).containsExactly("step,val_loss", "10,0.5");
  }

  @Test
  void followsRotationByRenameAndANewFileReadingTheOldOneToItsEnd() throws Exception {
    Path f = dir.resolve("m.log");
    append(f, "a\n");
    FileFollower ff = follower(f, 1024);
    ff.poll();
    append(f, "b\nlast-without-newline");
    Files.move(f, dir.resolve("m.log.1"));
    append(f, "c\n");
    ff.poll();
    assertThat(got).containsExactly("a", "b", "last-without-newline", "c");
    assertThat(ff.rotations()).isEqualTo(1);
  }

  @Test
  void restartsAtTheTopAfterCopyTruncate() throws Exception {
    Path f = dir.resolve("m.log");
    append(f, "first line, long enough\nsecond line, long enough\n");
    FileFollower ff = follower(f, 1024);
    ff.poll();
    Files.copy(f, dir.resolve("m.log.1"));
    Files.write(f, new byte[0], StandardOpenOption.TRUNCATE_EXISTING);
    ff.poll();
    append(f, "x\n");
    ff.poll();
    assertThat(got).containsExactly("first line, long enough", "second line, long enough", "x");
    assertThat(ff.truncations()).isEqualTo(1);
  }

  @Test
  void survivesDeletionAndPicksUpTheFileWhenItReturns() throws Exception {
    Path f = dir.resolve("m.log");
    append(f, "one\n");
    FileFollower ff = follower(f, 1024);
    ff.poll();
    Files.delete(f);
    assertThat(ff.poll()).isZero();
    assertThat(ff.poll()).isZero();
    append(f, "two\n");
    ff.poll();
    assertThat(got).containsExactly("one", "two");
  }

  @Test
  void cutsLinesAtTheLimitCountsThemAndKeepsReading() throws Exception {
    Path f = dir.resolve("big.log");
    append(f, "x".repeat(10 * 1024 * 1024) + "\nsmall\n");
    FileFollower ff = follower(f, 100);
    ff.poll();
    assertThat(got).hasSize(2);
    assertThat(got.get(0)).hasSize(100);
    assertThat(cuts).containsExactly(true, false);
    assertThat(got.get(1)).isEqualTo("small");
    assertThat(ff.oversizedLines()).isEqualTo(1);
  }

  @Test
  void keepsOnlyWhatFollowsABareCarriageReturnAsTheProcessLayerDoes() throws Exception {
    Path f = dir.resolve("bar.log");
    append(f, "10%\r50%\r100% done\n");
    FileFollower ff = follower(f, 1024);
    ff.poll();
    assertThat(got).containsExactly("100% done");
  }

  @Test
  void itsOwnThreadDeliversAppendedLinesAndCloseStopsIt() throws Exception {
    Path f = dir.resolve("live.log");
    List<String> lines = new CopyOnWriteArrayList<>();
    FileFollower ff = FileFollower.start(f, Duration.ofMillis(10), 1024, lines::add);
    try {
      append(f, "hello\n");
      long deadline = System.nanoTime() + TimeUnit.SECONDS.toNanos(10);
      while (lines.isEmpty() && System.nanoTime() < deadline) {
        Thread.onSpinWait();
        Thread.sleep(5);
      }
      assertThat(lines).containsExactly("hello");
    } finally {
      ff.close();
    }
  }
}
