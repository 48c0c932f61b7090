package dev.stepwarden.process;

import java.io.IOException;
import java.io.InputStream;
import java.io.OutputStream;
import java.io.PrintStream;
import java.util.Arrays;
import java.util.concurrent.ArrayBlockingQueue;
import java.util.concurrent.CompletableFuture;
import java.util.concurrent.CountDownLatch;
import java.util.concurrent.ScheduledThreadPoolExecutor;
import java.util.concurrent.TimeUnit;
import java.util.concurrent.atomic.AtomicBoolean;
import java.util.concurrent.atomic.AtomicInteger;
import java.util.concurrent.locks.LockSupport;
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
 *
 * <p>A trickle (a trainer printing a line now and then, as real ones do) takes a cheaper path: a
 * small read (it emptied the pipe) with nothing queued or being delivered is delivered on the
 * reading thread itself, so a line costs no thread hand-off (two context switches). While it
 * is being delivered the pipe still holds 64 KiB of further output, seconds of a trickle; a
 * bigger next read is queued again. Trickle reads come at most every {@link #GATHER_NANOS}, so
 * lines printed faster than that are read a few at a time. The log is written through a buffer that
 * a shared timer flushes {@link #FLUSH_MILLIS} after it was first written to (one write system
 * call per interval instead of one per read), on {@link #flushLog()} and at the end of the
 * stream; an idle stream schedules nothing.
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
  /** A read at most this big, with nothing more waiting, may be delivered on the reading thread. */
  static final int INLINE_READ = 16 * 1024;
  /** The longest a byte stays in the log's buffer (a kill -9 of the supervisor loses at most it). */
  static final long FLUSH_MILLIS = 200;
  /**
   * Reads of a trickle come at most this often: a line may wait this long in the pipe (the
   * reaction to it with it), and at 500 lines/s a read takes two or three lines instead of one.
   * Slower trickles are read at once, line by line; a flood's full reads never wait.
   */
  static final long GATHER_NANOS = TimeUnit.MILLISECONDS.toNanos(4);
  /** One daemon thread for every pump's timed log flush; it sleeps while nothing is due. */
  private static final ScheduledThreadPoolExecutor FLUSHER = flusher();
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
  /** Guarded by {@code this}: the reading thread writes it, the flusher and others flush it. */
  private OutputStream log;
  private final AtomicBoolean flushDue = new AtomicBoolean();
  /**
   * Batches queued or being delivered. Only the reading thread raises it, so at zero the delivery
   * thread is idle and stays so until the reader queues again: the reader may deliver itself.
   */
  private final AtomicInteger inFlight = new AtomicInteger();
  /** The delivering thread's (never two at once: see {@link #inFlight}). */
  private boolean listenerFailed;
  private long delivered;
  /** Reading thread only: when the previous read returned. */
  private long lastReadAt = System.nanoTime() - GATHER_NANOS;
  private boolean paused;
  private long pausedUntil;
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
        long readAt = System.nanoTime();
        writeLog(buf, n);
        splitter.feed(buf, 0, n, this);
        flushEcho();
        // A read shorter than the buffer emptied the pipe: nothing more is waiting right now.
        boolean trickle = n <= INLINE_READ;
        if (trickle && inFlight.get() == 0) {
          deliverInline();
        } else {
          flushBatch();
        }
        publish();
        // Lines come faster than one per GATHER_NANOS (two reads closer than that, or lines were
        // waiting at once after the last pause): let a few gather in the pipe, so that one
        // wake-up reads them together (a wake-up costs more than the lines it reads).
        boolean fast = readAt - lastReadAt < GATHER_NANOS
            || (paused && readAt - pausedUntil < GATHER_NANOS / 4);
        paused = false;
        if (trickle && fast) {
          LockSupport.parkNanos(GATHER_NANOS - (System.nanoTime() - readAt));
          paused = true;
          pausedUntil = System.nanoTime();
        }
        lastReadAt = readAt;
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
    inFlight.incrementAndGet();
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
        deliverCounted(b);
      } finally {
        b.clear();
        free.offer(b); // never full: at most QUEUED_BATCHES batches exist besides the one filling
        inFlight.decrementAndGet(); // after the delivery: the reader sees its effects at zero
      }
    }
  }

  /** The read's lines on this thread: nothing is queued or being delivered, so order holds. */
  private void deliverInline() {
    if (batch.size() == 0) {
      return;
    }
    try {
      deliverCounted(batch);
    } finally {
      batch.clear();
    }
  }

  private void deliverCounted(LineBatch b) {
    try {
      deliver(b);
      delivered += b.size();
    } catch (RuntimeException | Error e) {
      // Even an Error must not stop the pump, or the trainer would wait on its pipe.
      listenerFailed(e);
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

  private synchronized void writeLog(byte[] b, int n) {
    if (log == null) {
      return;
    }
    try {
      log.write(b, 0, n);
    } catch (IOException e) {
      dropLog(e);
      return;
    }
    if (flushDue.compareAndSet(false, true)) {
      FLUSHER.schedule(this::timedFlush, FLUSH_MILLIS, TimeUnit.MILLISECONDS);
    }
  }

  private void timedFlush() {
    flushDue.set(false); // first: bytes written from now on schedule the next flush
    flushLog();
  }

  /** Writes what the log's buffer holds to the file now (any thread). */
  synchronized void flushLog() {
    if (log == null) {
      return;
    }
    try {
      log.flush();
    } catch (IOException e) {
      dropLog(e);
    }
  }

  private static ScheduledThreadPoolExecutor flusher() {
    ScheduledThreadPoolExecutor e = new ScheduledThreadPoolExecutor(1, r -> {
      Thread t = new Thread(r, "stepwarden-log-flush");
      t.setDaemon(true);
      return t;
    });
    return e;
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

  private synchronized void closeLog() {
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
