package dev.stepwarden.metrics;

import java.io.IOException;
import java.nio.ByteBuffer;
import java.nio.channels.FileChannel;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.NoSuchFileException;
import java.nio.file.Path;
import java.nio.file.StandardOpenOption;
import java.nio.file.attribute.BasicFileAttributes;
import java.time.Duration;
import java.util.Arrays;
import java.util.Objects;
import java.util.function.Consumer;

/**
 * Follows a file a trainer appends to and delivers each complete line, on its own daemon thread.
 *
 * <p>Design: polling (portable, and a metrics file changes at most a few times a second). Each
 * poll reads what was appended since the last one. It survives:
 * <ul>
 *   <li>late creation: until the file exists, polls find nothing;</li>
 *   <li>rotation (rename, then a new file at the path): the old file is read to its end first,
 *       its last unterminated line is delivered, then the new file is read from its start;</li>
 *   <li>copy-truncate (the file shrinks under us): reading restarts at offset 0;</li>
 *   <li>deletion: the open file is drained, then the follower waits for the path to reappear.</li>
 * </ul>
 * A truncation that is refilled past the old length between two polls cannot be told from an
 * append; a short poll interval makes that unlikely. Lines follow the process layer's rules: the
 * terminator ({@code \n} or {@code \r\n}) is dropped, only the text after a bare {@code \r} is
 * kept (a redrawn progress bar), lines longer than the limit are cut and counted, UTF-8 is decoded
 * leniently. The consumer runs on the follower's thread.
 */
public final class FileFollower implements AutoCloseable {
  /** Receives a line and whether it was cut at the line limit. */
  @FunctionalInterface
  public interface LineSink {
    void line(String line, boolean cut);
  }

  private static final int CHUNK = 64 * 1024;

  private final Path path;
  private final Duration interval;
  private final int lineLimit;
  private final LineSink sink;
  private final ByteBuffer buf = ByteBuffer.allocate(CHUNK);
  private byte[] acc = new byte[256];
  private int accLen;
  private boolean accCut;
  private boolean lastWasCr;

  private FileChannel channel;
  private Object fileKey;
  private long position;
  private volatile boolean closed;
  private final Object wake = new Object();
  private Thread thread;
  private volatile long lines;
  private volatile long oversized;
  private volatile long rotations;
  private volatile long truncations;
  private volatile IOException lastError;

  /** A follower not yet started: call {@link #start()}, or {@link #poll()} from a test. */
  public FileFollower(Path path, Duration interval, int lineLimit, LineSink sink) {
    this.path = Objects.requireNonNull(path, "path");
    this.interval = Objects.requireNonNull(interval, "interval");
    if (interval.isNegative() || interval.isZero()) {
      throw new IllegalArgumentException("poll interval must be positive, was " + interval);
    }
    if (lineLimit < 16) {
      throw new IllegalArgumentException("line limit must be at least 16, was " + lineLimit);
    }
    this.lineLimit = lineLimit;
    this.sink = Objects.requireNonNull(sink, "sink");
  }

  /** Follows {@code path} on a daemon thread, polling every {@code interval}. */
  public static FileFollower start(Path path, Duration interval, int lineLimit,
      Consumer<String> lines) {
    return new FileFollower(path, interval, lineLimit, (l, cut) -> lines.accept(l)).start();
  }

  public synchronized FileFollower start() {
    if (thread != null) {
      throw new IllegalStateException("already started");
    }
    thread = new Thread(this::loop, "stepwarden-follow-" + path.getFileName());
    thread.setDaemon(true);
    thread.start();
    return this;
  }

  private void loop() {
    long sleepMillis = Math.max(1, interval.toMillis());
    while (!closed) {
      try {
        poll();
        lastError = null;
      } catch (IOException e) {
        lastError = e; // keep following: the file may come back
      }
      synchronized (wake) {
        if (closed) {
          break;
        }
        try {
          wake.wait(sleepMillis);
        } catch (InterruptedException e) {
          break;
        }
      }
    }
    try {
      poll(); // the last words written before close
    } catch (IOException e) {
      lastError = e;
    }
  }

  /**
   * One poll: reads what was appended, handles rotation, truncation and deletion. Returns the
   * number of lines delivered. Called by the follower thread; tests call it directly.
   */
  public synchronized int poll() throws IOException {
    int before = (int) lines;
    Object keyNow = null;
    boolean exists;
    try {
      BasicFileAttributes a = Files.readAttributes(path, BasicFileAttributes.class);
      exists = a.isRegularFile();
      keyNow = a.fileKey();
    } catch (NoSuchFileException e) {
      exists = false;
    }
    if (channel != null) {
      boolean replaced = !exists || (keyNow != null && !keyNow.equals(fileKey));
      if (replaced) {
        drain();
        flushPartial();
        closeChannel();
        if (exists) {
          rotations++;
        }
      } else if (channel.size() < position) {
        truncations++;
        position = 0;
        clearAcc(); // the half line we held belonged to the old content
        drain();
      } else {
        drain();
      }
    }
    if (channel == null && exists) {
      try {
        channel = FileChannel.open(path, StandardOpenOption.READ);
      } catch (NoSuchFileException e) {
        return (int) lines - before;
      }
      fileKey = keyNow;
      position = 0;
      drain();
    }
    return (int) lines - before;
  }

  private void drain() throws IOException {
    while (true) {
      buf.clear();
      int n = channel.read(buf, position);
      if (n <= 0) {
        return;
      }
      position += n;
      split(buf.array(), n);
    }
  }

  private void split(byte[] b, int n) {
    for (int i = 0; i < n; i++) {
      byte c = b[i];
      if (lastWasCr) {
        lastWasCr = false;
        if (c == '\n') {
          emit();
          continue;
        }
        clearAcc(); // a bare '\r': the text before it was redrawn over
      }
      if (c == '\n') {
        emit();
      } else if (c == '\r') {
        lastWasCr = true;
      } else if (accLen < lineLimit) {
        if (accLen == acc.length) {
          acc = Arrays.copyOf(acc, Math.min(lineLimit, acc.length * 2));
        }
        acc[accLen++] = c;
      } else {
        accCut = true;
      }
    }
  }

  /** A file that is gone or replaced will not finish its last line: deliver it as it is. */
  private void flushPartial() {
    lastWasCr = false;
    if (accLen > 0 || accCut) {
      emit();
    }
  }

  private void emit() {
    int len = accCut ? utf8SafeLength(acc, accLen) : accLen;
    String line = new String(acc, 0, len, StandardCharsets.UTF_8);
    boolean cut = accCut;
    clearAcc();
    lines++;
    if (cut) {
      oversized++;
    }
    sink.line(line, cut);
  }

  private void clearAcc() {
    accLen = 0;
    accCut = false;
    if (acc.length > 64 * 1024) {
      acc = new byte[256]; // do not pin a giant line's buffer
    }
  }

  private static int utf8SafeLength(byte[] b, int len) {
    for (int k = 1; k <= Math.min(4, len); k++) {
      int c = b[len - k] & 0xFF;
      if ((c & 0xC0) != 0x80) {
        int need = c < 0xC0 ? 1 : c < 0xE0 ? 2 : c < 0xF0 ? 3 : 4;
        return need > k ? len - k : len;
      }
    }
    return len;
  }

  private void closeChannel() throws IOException {
    if (channel != null) {
      channel.close();
      channel = null;
      fileKey = null;
      position = 0;
    }
  }

  public Path path() {
    return path;
  }

  public long lines() {
    return lines;
  }

  public long oversizedLines() {
    return oversized;
  }

  /** Times the path was found to name a new file (rename-and-recreate rotation). */
  public long rotations() {
    return rotations;
  }

  /** Times the file was found shorter than what was already read (copy-truncate). */
  public long truncations() {
    return truncations;
  }

  /** The last I/O error of the follower thread, or null once a poll succeeded again. */
  public IOException lastError() {
    return lastError;
  }

  /** Stops the thread after a last poll (lines written before close are delivered). */
  @Override
  public void close() {
    closed = true;
    Thread t;
    synchronized (this) {
      t = thread;
    }
    synchronized (wake) {
      wake.notifyAll();
    }
    if (t != null && t != Thread.currentThread()) {
      try {
        t.join(5_000);
      } catch (InterruptedException e) {
        Thread.currentThread().interrupt();
      }
    }
    synchronized (this) {
      try {
        closeChannel();
      } catch (IOException e) {
        lastError = e;
      }
    }
  }
}
