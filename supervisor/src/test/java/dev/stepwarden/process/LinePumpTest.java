package dev.stepwarden.process;

import static org.junit.jupiter.api.Assertions.assertEquals;
import static org.junit.jupiter.api.Assertions.assertNotEquals;
import static org.junit.jupiter.api.Assertions.assertTrue;

import java.io.ByteArrayOutputStream;
import java.io.IOException;
import java.io.InputStream;
import java.nio.charset.StandardCharsets;
import java.util.ArrayList;
import java.util.Collections;
import java.util.List;
import java.util.concurrent.BlockingQueue;
import java.util.concurrent.CountDownLatch;
import java.util.concurrent.LinkedBlockingQueue;
import java.util.concurrent.TimeUnit;
import org.junit.jupiter.api.Test;

/** The pump's two delivery paths (on the reading thread for a trickle, queued otherwise) and its log. */
class LinePumpTest {
  /** Hands out exactly the chunks it is given, one per read, and says how much is waiting. */
  static final class Chunks extends InputStream {
    private final BlockingQueue<byte[]> chunks = new LinkedBlockingQueue<>();
    private static final byte[] EOF = new byte[0];
    private final java.util.concurrent.atomic.AtomicInteger waiting =
        new java.util.concurrent.atomic.AtomicInteger();

    void send(String s) {
      byte[] b = s.getBytes(StandardCharsets.UTF_8);
      waiting.incrementAndGet();
      chunks.add(b);
    }

    void end() {
      chunks.add(EOF);
    }

    @Override
    public int read() {
      throw new UnsupportedOperationException();
    }

    @Override
    public int read(byte[] buf, int off, int len) throws IOException {
      try {
        byte[] b = chunks.take();
        if (b == EOF) {
          return -1;
        }
        waiting.decrementAndGet();
        System.arraycopy(b, 0, buf, off, b.length);
        return b.length;
      } catch (InterruptedException e) {
        throw new IOException(e);
      }
    }

    @Override
    public int available() {
      return waiting.get() > 0 ? 1 : 0;
    }
  }

  /** Records each line with the thread that delivered it; the first call may be held back. */
  static final class Recorder implements LineBatchListener {
    final List<String> lines = Collections.synchronizedList(new ArrayList<>());
    final List<String> threads = Collections.synchronizedList(new ArrayList<>());
    final CountDownLatch firstEntered = new CountDownLatch(1);
    final CountDownLatch release;

    Recorder(boolean holdFirst) {
      release = new CountDownLatch(holdFirst ? 1 : 0);
    }

    @Override
    public void onLines(TrainerStream stream, LineBatch b) {
      firstEntered.countDown();
      try {
        release.await(30, TimeUnit.SECONDS);
      } catch (InterruptedException e) {
        Thread.currentThread().interrupt();
      }
      for (int i = 0; i < b.size(); i++) {
        lines.add(b.text(i));
        threads.add(Thread.currentThread().getName());
      }
    }
  }

  private static Thread start(LinePump pump) {
    Thread t = new Thread(pump, "reader");
    t.setDaemon(true);
    t.start();
    return t;
  }

  private static LinePump pump(Chunks in, ByteArrayOutputStream log, Recorder r) {
    return new LinePump(in, TrainerStream.STDOUT, log, r, null, 1 << 20, e -> {
      throw new AssertionError(e);
    });
  }

  private static void awaitLines(Recorder r, int n) throws InterruptedException {
    long deadline = System.nanoTime() + TimeUnit.SECONDS.toNanos(30);
    while (r.lines.size() < n && System.nanoTime() < deadline) {
      Thread.sleep(1);
    }
  }

  @Test
  void aTrickleIsDeliveredOnTheReadingThreadWithoutAHandOff() throws Exception {
    Chunks in = new Chunks();
    Recorder r = new Recorder(false);
    LinePump pump = pump(in, null, r);
    start(pump);
    in.send("{\"step\": 1}\n");
    awaitLines(r, 1);
    in.send("{\"step\": 2}\n");
    awaitLines(r, 2);
    in.end();
    assertTrue(pump.await(30, TimeUnit.SECONDS));
    assertEquals(List.of("{\"step\": 1}", "{\"step\": 2}"), r.lines);
    assertEquals(List.of("reader", "reader"), r.threads);
  }

  @Test
  void aReadWhileEarlierLinesAreStillBeingDeliveredIsQueuedAndOrderHolds() throws Exception {
    Chunks in = new Chunks();
    Recorder r = new Recorder(true);
    LinePump pump = pump(in, null, r);
    start(pump);
    // A big read goes to the delivery thread, and the listener is held inside it...
    String big = "x".repeat(LinePump.INLINE_READ);
    in.send(big + "\n");
    assertTrue(r.firstEntered.await(30, TimeUnit.SECONDS));
    // ... so small reads arriving meanwhile must queue behind it, not overtake it inline.
    in.send("b\n");
    in.send("c\n");
    in.end();
    long deadline = System.nanoTime() + TimeUnit.SECONDS.toNanos(30);
    while (pump.lines() < 3 && System.nanoTime() < deadline) {
      Thread.sleep(1); // the reader has taken "b" and "c" while the first batch is held
    }
    r.release.countDown();
    assertTrue(pump.await(30, TimeUnit.SECONDS));
    assertEquals(List.of(big, "b", "c"), r.lines);
    assertEquals(List.of("reader-lines", "reader-lines", "reader-lines"), r.threads);
  }

  @Test
  void aBigReadGoesToTheDeliveryThreadSoReadingAndParsingOverlap() throws Exception {
    Chunks in = new Chunks();
    Recorder r = new Recorder(false);
    LinePump pump = pump(in, null, r);
    start(pump);
    in.send("x".repeat(LinePump.INLINE_READ) + "\n");
    in.end();
    assertTrue(pump.await(30, TimeUnit.SECONDS));
    assertEquals(1, r.lines.size());
    assertNotEquals("reader", r.threads.get(0));
  }

  @Test
  void theLogIsBufferedFlushedOnDemandAndByTheTimerWithoutTheStreamEnding() throws Exception {
    Chunks in = new Chunks();
    Recorder r = new Recorder(false);
    ByteArrayOutputStream log = new ByteArrayOutputStream();
    LinePump pump = pump(in, log, r);
    start(pump);
    in.send("one\n");
    awaitLines(r, 1);
    pump.flushLog();
    assertEquals("one\n", log.toString(StandardCharsets.UTF_8), "flushLog writes the buffer now");
    in.send("two\n");
    // No end of stream and no flushLog: only the timer can write "two" to the log.
    long deadline = System.nanoTime() + TimeUnit.SECONDS.toNanos(30);
    while (!log.toString(StandardCharsets.UTF_8).equals("one\ntwo\n")
        && System.nanoTime() < deadline) {
      Thread.sleep(5);
    }
    assertEquals("one\ntwo\n", log.toString(StandardCharsets.UTF_8));
    in.end();
    assertTrue(pump.await(30, TimeUnit.SECONDS));
  }

  @Test
  void aThrowingListenerOnTheReadingThreadDoesNotStopTheDraining() throws Exception {
    Chunks in = new Chunks();
    List<Throwable> failures = Collections.synchronizedList(new ArrayList<>());
    List<String> seen = Collections.synchronizedList(new ArrayList<>());
    LineBatchListener throwing = new LineBatchListener() {
      @Override
      public void onLines(TrainerStream s, LineBatch b) {
        seen.add(b.text(0));
        throw new IllegalStateException("boom");
      }
    };
    LinePump pump = new LinePump(in, TrainerStream.STDOUT, null, throwing, null, 1 << 20,
        failures::add);
    start(pump);
    in.send("a\n");
    in.send("b\n");
    in.end();
    assertTrue(pump.await(30, TimeUnit.SECONDS));
    assertEquals(List.of("a", "b"), seen);
    assertEquals(1, failures.size(), "reported once");
  }
}
