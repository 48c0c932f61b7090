package dev.stepwarden.process;

import java.io.IOException;
import java.io.InputStream;
import java.io.OutputStream;
import java.io.PrintStream;
import java.nio.charset.StandardCharsets;
import java.util.Arrays;
import java.util.concurrent.CountDownLatch;
import java.util.concurrent.TimeUnit;
import java.util.function.Consumer;

/**
 * Drains one trainer stream on its own thread: raw bytes to the log, lines to the listener and the
 * echo. It reads 64 KiB chunks and never stops draining (a listener or log failure is reported and
 * skipped), so the trainer cannot block on a full pipe because of us.
 */
final class LinePump implements Runnable, LineSplitter.Sink {
  static final int CHUNK = 64 * 1024; // the Linux default pipe capacity: one read empties a full pipe
  private static final int LOG_BUFFER = 128 * 1024;

  private final InputStream in;
  private final TrainerStream stream;
  private final LineListener listener;
  private final PrintStream echo;
  private final Consumer<Throwable> failures;
  private final LineSplitter splitter;
  /** Non-null in batch mode: lines collect here and go out once per read. */
  private final LineBatchListener batchListener;
  private final LineBatch batch;
  private final CountDownLatch done = new CountDownLatch(1);
  private OutputStream log;
  private boolean listenerFailed;
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
    this.batch = batchListener == null ? null : new LineBatch();
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

  @Override
  public void run() {
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
      done.countDown();
    }
  }

  @Override
  public void line(byte[] b, int off, int len, boolean cut) {
    if (batch != null) {
      batch.add(b, off, len, cut);
      if (batch.full()) {
        flushBatch();
      }
    } else {
      String text = new String(b, off, len, StandardCharsets.UTF_8); // malformed: U+FFFD
      try {
        listener.onLine(stream, text);
      } catch (RuntimeException e) {
        listenerFailed(e);
      }
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

  private void flushBatch() {
    if (batch == null || batch.size() == 0) {
      return;
    }
    try {
      batchListener.onLines(stream, batch);
    } catch (RuntimeException e) {
      listenerFailed(e);
    } finally {
      batch.clear();
    }
  }

  private void listenerFailed(RuntimeException e) {
    if (!listenerFailed) { // report the first; a listener failing on every line costs no more
      listenerFailed = true;
      failures.accept(new IllegalStateException("the line listener threw on " + name()
          + " line " + splitter.lines() + "; the pump keeps draining", e));
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
      if (echoBuf.length > LOG_BUFFER) {
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
