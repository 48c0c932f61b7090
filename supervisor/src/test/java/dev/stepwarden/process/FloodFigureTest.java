package dev.stepwarden.process;

import static org.assertj.core.api.Assertions.assertThat;

import java.nio.file.Files;
import java.nio.file.Path;
import java.time.Duration;
import java.util.List;
import java.util.Locale;
import java.util.concurrent.atomic.LongAdder;
import org.junit.jupiter.api.Tag;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;

/**
 * Flood harness: how fast the pump takes a trainer's stdout, next to the same command writing into
 * /dev/null. The figures are printed, never asserted on; only the counts (and log sizes) are
 * checked. Rows: 100 MB of 100-column lines and 39 MB of 26-byte metric-like lines, each into
 * /dev/null and through the pump with a log; last, the pump alone fed from memory and warmed up,
 * which is its ceiling without a producer competing for the cores. Each piped row includes JVM
 * warm-up of the pump code and the trainer's own cost, so it is a lower bound on a warmed pump.
 */
@Tag("flood")
class FloodFigureTest {
  @TempDir Path dir;

  /** 100 MB of 'x' folded into 100-column lines: 1,000,000 lines, the last without a newline. */
  private static final String WIDE = "head -c 100000000 /dev/zero | tr '\\0' x | fold -w 100";
  private static final long WIDE_LINES = 1_000_000;
  private static final long WIDE_BYTES = 100_999_999;

  /** Metric-like short lines (26 bytes each): where lines per second matter. */
  private static final String SHORT_PY = "import sys\n"
      + "block = b''.join(b'step=%06d loss=0.123456\\n' % i for i in range(10000))\n"
      + "for _ in range(150): sys.stdout.buffer.write(block)\n";
  private static final long SHORT_LINES = 1_500_000;
  private static final long SHORT_BYTES = 1_500_000L * 26;

  @Test
  void pumpCountsEveryLineOfAFloodAndPrintsItsThroughput() throws Exception {
    List<String> wide = List.of("/bin/sh", "-c", WIDE);
    List<String> shortLines = List.of("python3", "-c", SHORT_PY);

    double wideNull = secondsIntoDevNull(List.of("/bin/sh", "-c", WIDE + " > /dev/null"));
    double wideLog = secondsThroughPump(wide, 100, WIDE_LINES, WIDE_BYTES);
    double shortNull = secondsIntoDevNull(List.of("/bin/sh", "-c",
        "python3 -c \"$1\" > /dev/null", "sh", SHORT_PY));
    double shortLog = secondsThroughPump(shortLines, 25, SHORT_LINES, SHORT_BYTES);

    System.out.println("flood figure (" + Runtime.getRuntime().availableProcessors() + " cores)");
    System.out.println(row("100-col lines, into /dev/null", WIDE_BYTES, WIDE_LINES, wideNull));
    System.out.println(row("100-col lines, pump + log", WIDE_BYTES, WIDE_LINES, wideLog));
    System.out.println(row("26-byte lines, into /dev/null", SHORT_BYTES, SHORT_LINES, shortNull));
    System.out.println(row("26-byte lines, pump + log", SHORT_BYTES, SHORT_LINES, shortLog));
    secondsInMemory(); // warm-up round: the rows above include JIT warm-up, this one does not
    System.out.println(row("100-col lines, pump from memory", 101_000_000L, WIDE_LINES,
        secondsInMemory()));
  }

  /** The pump's own ceiling: the same 100-column lines from memory, no pipe, no producer. */
  private static double secondsInMemory() {
    byte[] block = new byte[101 * 10_000];
    for (int i = 0; i < block.length; i++) {
      block[i] = i % 101 == 100 ? (byte) '\n' : (byte) 'x';
    }
    java.io.InputStream in = new java.io.InputStream() {
      private int served;
      private int pos;

      @Override
      public int read() {
        throw new UnsupportedOperationException("the pump reads in chunks");
      }

      @Override
      public int read(byte[] b, int off, int len) {
        if (served == 100) {
          return -1;
        }
        int n = Math.min(len, block.length - pos);
        System.arraycopy(block, pos, b, off, n);
        pos += n;
        if (pos == block.length) {
          pos = 0;
          served++;
        }
        return n;
      }
    };
    LongAdder lines = new LongAdder();
    LinePump pump = new LinePump(in, TrainerStream.STDOUT, null, (s, line) -> lines.increment(),
        null, LaunchSpec.DEFAULT_MAX_LINE_CHARS, t -> {
          throw new AssertionError(t);
        });
    long t0 = System.nanoTime();
    pump.run();
    double seconds = (System.nanoTime() - t0) / 1e9;
    assertThat(lines.sum()).isEqualTo(WIDE_LINES);
    return seconds;
  }

  private static String row(String what, long bytes, long lines, double seconds) {
    return String.format(Locale.ROOT, "  %-32s %7.3f s %8.1f MB/s %10.0f lines/s", what, seconds,
        bytes / 1e6 / seconds, lines / seconds);
  }

  private double secondsIntoDevNull(List<String> argv) throws Exception {
    long t0 = System.nanoTime();
    Process p = new ProcessBuilder(argv).redirectErrorStream(true).start();
    p.getInputStream().transferTo(java.io.OutputStream.nullOutputStream());
    assertThat(p.waitFor()).isZero();
    return (System.nanoTime() - t0) / 1e9;
  }

  private double secondsThroughPump(List<String> argv, int lineLength,
      long expectedLines, long expectedBytes) throws Exception {
    Path logFile = dir.resolve("flood.out");
    Files.deleteIfExists(logFile);
    LongAdder lines = new LongAdder();
    LongAdder wrongLength = new LongAdder();
    LaunchSpec.Builder b = LaunchSpec.builder().command(argv).workingDirectory(dir).echo(false)
        .stdoutLog(logFile);
    long t0 = System.nanoTime();
    TrainerProcess tp = TrainerProcess.start(b.build(), (s, line) -> {
      if (s == TrainerStream.STDOUT) {
        lines.increment();
        if (line.length() != lineLength) {
          wrongLength.increment();
        }
      }
    });
    assertThat(tp.waitFor(Duration.ofSeconds(60))).hasValue(0);
    double seconds = (System.nanoTime() - t0) / 1e9;
    assertThat(lines.sum()).isEqualTo(expectedLines);
    assertThat(tp.linesRead()).isEqualTo(expectedLines);
    assertThat(wrongLength.sum()).isZero();
    assertThat(Files.size(logFile)).as("the log holds every byte").isEqualTo(expectedBytes);
    Files.delete(logFile);
    return seconds;
  }
}
