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
 *   <li>a rewrite of the whole file (a data frame's {@code to_csv} every epoch, in place or as a
 *       new file renamed over the path): when the new content starts with every byte already
 *       read, reading continues after them, so no line is delivered twice; while the rewrite is
 *       still shorter than what was read and agrees with it, the follower waits for it.</li>
 * </ul>
 * The bytes read are kept up to {@link #REWRITE_MEMORY} to recognise a rewrite; past that a
 * shrunk or replaced file is read from its start as before.
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
  /** How many bytes already read are kept to recognise a whole-file rewrite. */
  public static final int REWRITE_MEMORY = 4 << 20;

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
  private volatile long rewrites;
  private byte[] seen = new byte[4096];
  private int seenLen;
  private boolean seenCapped;
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
        Rewrite r = exists ? rewriteOf(keyNow) : Rewrite.NO;
        if (r == Rewrite.WAIT) {
          return (int) lines - before; // the new file is still catching up with what we read
        }
        if (r == Rewrite.CONTINUES) {
          rewrites++;
          drain(); // the rest of the new file, after the bytes already read
          return (int) lines - before;
        }
        flushPartial();
        closeChannel();
        if (exists) {
          rotations++;
        }
      } else if (channel.size() < position) {
        if (agreesWithSeen(channel, channel.size())) {
          return (int) lines - before; // rewritten in place, not yet back to where we were
        }
        truncations++;
        position = 0;
        forgetSeen();
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
      forgetSeen();
      drain();
    }
    return (int) lines - before;
  }

  private enum Rewrite { NO, WAIT, CONTINUES }

  /**
   * The path names a new file: a rewrite of ours when it starts with every byte already read
   * (then it becomes the followed file, at the same position), still catching up, or not one.
   */
  private Rewrite rewriteOf(Object keyNow) throws IOException {
    FileChannel fresh;
    try {
      fresh = FileChannel.open(path, StandardOpenOption.READ);
    } catch (NoSuchFileException e) {
      return Rewrite.NO;
    }
    boolean keep = false;
    try {
      long size = fresh.size();
      if (!agreesWithSeen(fresh, Math.min(size, position))) {
        return Rewrite.NO;
      }
      if (size < position) {
        return Rewrite.WAIT;
      }
      channel.close();
      channel = fresh;
      fileKey = keyNow;
      keep = true;
      return Rewrite.CONTINUES;
    } finally {
      if (!keep) {
        fresh.close();
      }
    }
  }

  /** Whether the first {@code n} bytes of {@code ch} are the first {@code n} bytes we read. */
  private boolean agreesWithSeen(FileChannel ch, long n) throws IOException {
    if (n > seenLen) {
      return false; // beyond what we kept: cannot tell, read it as new
    }
    ByteBuffer b = ByteBuffer.allocate((int) Math.min(CHUNK, Math.max(1, n)));
    long at = 0;
    while (at < n) {
      b.clear();
      b.limit((int) Math.min(b.capacity(), n - at));
      int got = ch.read(b, at);
      if (got <= 0) {
        return false;
      }
      if (!Arrays.equals(b.array(), 0, got, seen, (int) at, (int) at + got)) {
        return false;
      }
      at += got;
    }
    return true;
  }

  private void remember(byte[] b, int n) {
    if (seenCapped) {
      return;
    }
    if (seenLen + n > REWRITE_MEMORY) {
      seenCapped = true;
      return;
    }
    if (seenLen + n > seen.length) {
      seen = Arrays.copyOf(seen, Math.min(REWRITE_MEMORY, Math.max(seenLen + n,
          seen.length * 2)));
    }
    System.arraycopy(b, 0, seen, seenLen, n);
    seenLen += n;
  }

  private void forgetSeen() {
    seenLen = 0;
    seenCapped = false;
    if (seen.length > 64 * 1024) {
      seen = new byte[4096];
    }
  }

  private void drain() throws IOException {
    while (true) {
      buf.clear();
      int n = channel.read(buf, position);
      if (n <= 0) {
        return;
      }
      position += n;
      remember(buf.array(), n);
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

  /** Times the file was rewritten whole and reading went on after what was already read. */
  public long rewrites() {
    return rewrites;
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
