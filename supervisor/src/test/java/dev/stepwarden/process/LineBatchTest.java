package dev.stepwarden.process;

import static org.assertj.core.api.Assertions.assertThat;

import java.io.ByteArrayInputStream;
import java.io.InputStream;
import java.nio.charset.StandardCharsets;
import java.util.ArrayList;
import java.util.List;
import org.junit.jupiter.api.Test;

/** The batch listener sees exactly the lines the per-line listener sees, fewer calls. */
class LineBatchTest {

  /** An input stream that hands out at most {@code piece} bytes per read, like a slow pipe. */
  private static InputStream trickle(byte[] data, int piece) {
    return new ByteArrayInputStream(data) {
      @Override
      public synchronized int read(byte[] b, int off, int len) {
        return super.read(b, off, Math.min(len, piece));
      }
    };
  }

  private static byte[] scenario() {
    StringBuilder b = new StringBuilder();
    for (int i = 0; i < 5000; i++) {
      b.append("{\"step\": ").append(i).append(", \"loss\": 0.").append(i).append("}\n");
    }
    b.append("epoch 3: 10%\r").append("epoch 3: 100%\r\n"); // a redrawn progress bar
    b.append("x".repeat(300)).append('\n'); // beyond the 100-byte limit below: cut
    b.append("r\u00e9sum\u00e9 without newline");
    return b.toString().getBytes(StandardCharsets.UTF_8);
  }

  private static void drain(InputStream in, LineListener listener) {
    List<Throwable> failures = new ArrayList<>();
    new LinePump(in, TrainerStream.STDOUT, null, listener, null, 100, failures::add).run();
    assertThat(failures).isEmpty();
  }

  @Test
  void batchesCarryTheSameLinesAndCutFlagsAsOneByOneDelivery() {
    byte[] data = scenario();
    List<String> single = new ArrayList<>();
    drain(trickle(data, 777), (stream, line) -> single.add(line));

    List<String> batched = new ArrayList<>();
    List<Boolean> cuts = new ArrayList<>();
    int[] calls = new int[1];
    drain(trickle(data, 777), new LineBatchListener() {
      @Override
      public void onLines(TrainerStream stream, LineBatch lines) {
        calls[0]++;
        for (int i = 0; i < lines.size(); i++) {
          batched.add(lines.text(i));
          cuts.add(lines.cut(i));
          assertThat(new String(lines.bytes(), lines.offset(i), lines.length(i),
              StandardCharsets.UTF_8)).isEqualTo(lines.text(i));
        }
      }

      @Override
      public void onLine(TrainerStream stream, String line) {
        throw new AssertionError("the pump must use onLines");
      }
    });
    assertThat(batched).isEqualTo(single);
    assertThat(single).hasSize(5003).contains("epoch 3: 100%", "r\u00e9sum\u00e9 without newline");
    assertThat(single.get(5001)).hasSize(100);
    assertThat(cuts.get(5001)).isTrue();
    assertThat(cuts.stream().filter(c -> c).count()).isEqualTo(1);
    // one call per read (or per LineBatch.MAX_LINES), not per line
    assertThat(calls[0]).isLessThan(single.size() / 10);
  }

  @Test
  void aThrowingBatchListenerIsReportedOnceAndThePumpKeepsDraining() {
    byte[] data = scenario();
    List<Throwable> failures = new ArrayList<>();
    int[] calls = new int[1];
    new LinePump(trickle(data, 4096), TrainerStream.STDERR, null, new LineBatchListener() {
      @Override
      public void onLines(TrainerStream stream, LineBatch lines) {
        calls[0]++;
        throw new IllegalStateException("boom");
      }

      @Override
      public void onLine(TrainerStream stream, String line) {}
    }, null, 100, failures::add).run();
    assertThat(failures).hasSize(1);
    assertThat(calls[0]).isGreaterThan(1);
  }
}
