package dev.stepwarden.process;

import java.io.IOException;
import java.io.InputStream;
import java.io.OutputStream;
import java.io.PrintStream;
import java.util.Arrays;
import java.util.concurrent.ArrayBlockingQueue;
import java.util.concurrent.CompletableFuture;
import java.util.concurrent.CountDownLatch;
import java.util.concurrent.TimeUnit;
import java.util.function.Consumer;

/**
 * Drains one trainer stream: raw bytes to the log, lines to the listener and the echo. It reads
 * 64 KiB chunks and never stops draining (a listener or log failure is reported and skipped), so
 * the trainer cannot block on a full pipe because of us.
 *
 * <p>Design: two threads per stream. The reading thread ({@link #run()}) only copies: pipe to
 * log, lines into a {@link LineBatch} per read. A delivery thread hands each batch to the
 * listener. Up to {@link #QUEUED_BATCHES} batches (a few MiB) wait between them, so a listener
 * busy for a moment (a JIT warming up, a guard deciding, a checkpoint being noted) does not make
 * the trainer wait on a full 64 KiB pipe, and on two cores reading and parsing overlap. The queue
 * is bounded: a listener slower than the trainer for long blocks the trainer rather than memory
 * growing. {@link #run()} returns, and {@link #await()} releases, only when every line read has
 * been delivered.
 */
final class LinePump implements Runnable, LineSplitter.Sink {
  static final int CHUNK = 64 * 1024; // the Linux default pipe capacity: one read empties a full pipe
  /** Batches read but not yet delivered; one per read, so at most this many 64 KiB reads. */
  static final int QUEUED_BATCHES = 64;
  /**
   * Small reads (a trainer printing line by line) coalesce here; a read at least this big goes
   * to the log file directly (BufferedOutputStream does so), saving a copy of every flood byte.
   */
  private static final int LOG_BUFFER = 32 * 1024;
  private static final int ECHO_KEEP = 128 * 1024;
  /** Marks the end of the stream in the delivery queue. */
  private static final LineBatch END = new LineBatch();

  private final InputStream in;
  private final TrainerStream stream;
  private final LineListener listener;
  private final PrintStream echo;
  private final Consumer<Throwable> failures;
  private final LineSplitter splitter;
  /** Non-null in batch mode: the listener takes each read's lines at once. */
  private final LineBatchListener batchListener;
  /** Read lines wait here for the delivery thread; emptied batches go back to {@link #free}. */
  private final ArrayBlockingQueue<LineBatch> queued = new ArrayBlockingQueue<>(QUEUED_BATCHES + 1);
  private final ArrayBlockingQueue<LineBatch> free = new ArrayBlockingQueue<>(QUEUED_BATCHES + 1);
  private int batchesMade;
  /** The batch the reading thread fills. */
  private LineBatch batch;
  private final CountDownLatch done = new CountDownLatch(1);
  private final CompletableFuture<Void> finished = new CompletableFuture<>();
  private OutputStream log;
  /** Delivery thread only. */
  private boolean listenerFailed;
  private long delivered;
  private byte[] echoBuf;
  private int echoLen;
  private volatile long linesPublished;
  private volatile long oversizedPublished;

  LinePump(InputStream in, TrainerStream stream, OutputStream log, LineListener listener,
      PrintStream echo, int maxLine, Consumer<Throwable> failures) {
    this.in = in;
    this.stream = stream;
    this.log = log == null ? null : new java.io.BufferedOutputStream(log, LOG_BUFFER);
    this.listener = listener;
    this.echo = echo;
    this.failures = failures;
    this.splitter = new LineSplitter(maxLine);
    this.batchListener = listener instanceof LineBatchListener b ? b : null;
    this.batch = newBatch();
    this.echoBuf = echo == null ? null : new byte[8192];
  }

  long lines() {
    return linesPublished;
  }

  long oversized() {
    return oversizedPublished;
  }

  boolean await(long timeout, TimeUnit unit) throws InterruptedException {
    return done.await(timeout, unit);
  }

  void await() throws InterruptedException {
    done.await();
  }

  boolean isDone() {
    return done.getCount() == 0;
  }

  /** Reads the stream to its end on the calling thread; returns when every line is delivered. */
  @Override
  public void run() {
    Thread delivery = new Thread(this::deliverAll, Thread.currentThread().getName() + "-lines");
    delivery.setDaemon(true);
    delivery.start();
    try {
      read();
    } finally {
      putUninterruptibly(queued, END);
      joinUninterruptibly(delivery);
      done.countDown();
      finished.complete(null);
    }
  }

  /** Completes when every line is delivered and the log closed (as {@link #await()} returns). */
  CompletableFuture<Void> finished() {
    return finished;
  }

  private void read() {
    byte[] buf = new byte[CHUNK];
    try {
      int n;
      while ((n = in.read(buf, 0, buf.length)) >= 0) {
        if (n == 0) {
          continue;
        }
        writeLog(buf, n);
        splitter.feed(buf, 0, n, this);
        flushBatch();
        flushEcho();
        publish();
        if (nothingWaiting()) {
          flushLog(); // about to block: make the log current for anyone tailing it
        }
      }
    } catch (IOException e) {
      failures.accept(new IOException("reading the trainer's " + name() + " failed", e));
    } finally {
      splitter.finish(this);
      flushBatch();
      flushEcho();
      publish();
      closeLog();
    }
  }

  @Override
  public void line(byte[] b, int off, int len, boolean cut) {
    batch.add(b, off, len, cut);
    if (batch.full()) {
      flushBatch();
    }
    if (echoBuf != null) {
      if (echoLen + len + 1 > echoBuf.length) {
        echoBuf = Arrays.copyOf(echoBuf, Math.max(echoBuf.length * 2, echoLen + len + 1));
      }
      System.arraycopy(b, off, echoBuf, echoLen, len);
      echoLen += len;
      echoBuf[echoLen++] = '\n';
    }
  }

  /** Queues the lines read so far; blocks only when {@link #QUEUED_BATCHES} are waiting. */
  private void flushBatch() {
    if (batch.size() == 0) {
      return;
    }
    putUninterruptibly(queued, batch);
    LineBatch next = free.poll();
    if (next == null) {
      next = batchesMade < QUEUED_BATCHES ? newBatch() : takeUninterruptibly(free);
    }
    batch = next;
  }

  private LineBatch newBatch() {
    batchesMade++;
    return new LineBatch();
  }

  /** The delivery thread: each batch to the listener, in order, until the end marker. */
  private void deliverAll() {
    while (true) {
      LineBatch b = takeUninterruptibly(queued);
      if (b == END) {
        return;
      }
      try {
        deliver(b);
        delivered += b.size();
      } catch (RuntimeException | Error e) {
        // Even an Error must not stop the recycling, or the reading thread would wait forever
        // for a free batch and the trainer on its pipe.
        listenerFailed(e);
      } finally {
        b.clear();
        free.offer(b); // never full: at most QUEUED_BATCHES batches exist besides the one filling
      }
    }
  }

  private void deliver(LineBatch b) {
    if (batchListener != null) {
      batchListener.onLines(stream, b);
      return;
    }
    for (int i = 0; i < b.size(); i++) {
      listener.onLine(stream, b.text(i)); // malformed UTF-8 becomes U+FFFD
    }
  }

  private static <T> void putUninterruptibly(ArrayBlockingQueue<T> q, T item) {
    boolean interrupted = false;
    while (true) {
      try {
        q.put(item);
        break;
      } catch (InterruptedException e) {
        interrupted = true; // a line once read is delivered: retry, restore the flag after
      }
    }
    if (interrupted) {
      Thread.currentThread().interrupt();
    }
  }

  private static <T> T takeUninterruptibly(ArrayBlockingQueue<T> q) {
    boolean interrupted = false;
    try {
      while (true) {
        try {
          return q.take();
        } catch (InterruptedException e) {
          interrupted = true;
        }
      }
    } finally {
      if (interrupted) {
        Thread.currentThread().interrupt();
      }
    }
  }

  private static void joinUninterruptibly(Thread t) {
    boolean interrupted = false;
    while (true) {
      try {
        t.join();
        break;
      } catch (InterruptedException e) {
        interrupted = true;
      }
    }
    if (interrupted) {
      Thread.currentThread().interrupt();
    }
  }

  private void listenerFailed(Throwable e) {
    if (!listenerFailed) { // report the first; a listener failing on every line costs no more
      listenerFailed = true;
      failures.accept(new IllegalStateException("the line listener threw on " + name()
          + " after line " + delivered + "; the pump keeps draining", e));
    }
  }

  private String name() {
    return stream == TrainerStream.STDOUT ? "stdout" : "stderr";
  }

  private boolean nothingWaiting() {
    try {
      return in.available() == 0;
    } catch (IOException e) {
      return true;
    }
  }

  private void publish() {
    linesPublished = splitter.lines();
    oversizedPublished = splitter.oversized();
  }

  /** One write per chunk; the PrintStream lock is taken once per chunk, not per line. */
  private void flushEcho() {
    if (echoLen > 0) {
      echo.write(echoBuf, 0, echoLen);
      echo.flush();
      echoLen = 0;
      if (echoBuf.length > ECHO_KEEP) {
        echoBuf = new byte[8192];
      }
    }
  }

  private void writeLog(byte[] b, int n) {
    if (log == null) {
      return;
    }
    try {
      log.write(b, 0, n);
    } catch (IOException e) {
      dropLog(e);
    }
  }

  private void flushLog() {
    if (log == null) {
      return;
    }
    try {
      log.flush();
    } catch (IOException e) {
      dropLog(e);
    }
  }

  /** A full disk must not stall the trainer: report once, keep draining without the log. */
  private void dropLog(IOException e) {
    failures.accept(new IOException("writing the " + name()
        + " log failed; further output of this stream is not logged", e));
    OutputStream l = log;
    log = null;
    try {
      l.close();
    } catch (IOException ignored) {
      // already reported the first failure
    }
  }

  private void closeLog() {
    if (log == null) {
      return;
    }
    try {
      log.close();
    } catch (IOException e) {
      failures.accept(new IOException("closing the " + name() + " log failed", e));
    }
    log = null;
  }
}
