package dev.stepwarden.metrics;

import java.io.IOException;
import java.nio.ByteBuffer;
import java.nio.channels.FileChannel;
import java.nio.file.DirectoryStream;
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
 * Follows an event file a trainer's summary writer appends to, on its own daemon thread, and
 * delivers each event that holds scalars as a JSON line ({@link EventRecords}).
 *
 * <p>The path names the file, or a folder: then the newest {@code events.out.tfevents.*} file in
 * it (by modification time, then name) is followed, and when a newer one appears (a writer
 * started again after a restart) the old one is read to its end and the new one from its start.
 * A record not yet whole waits for the next poll; a file that shrinks (truncated, or replaced
 * under the same name) is read again from its start. Polling, like {@link FileFollower}, and for
 * the same reasons.
 */
public final class EventFileFollower implements AutoCloseable {
  /** The name every summary writer gives its event files. */
  public static final String PREFIX = "events.out.tfevents.";

  private final Path path;
  private final Duration interval;
  private final Consumer<String> sink;
  private final EventRecords records;
  private final ByteBuffer buf = ByteBuffer.allocate(64 * 1024);
  private byte[] acc = new byte[64 * 1024];
  private int accLen;
  private Path current;
  private Object fileKey;
  private long position;
  private java.util.concurrent.ScheduledExecutorService poller;
  private volatile long lines;

  /** A follower not yet started: call {@link #start()}, or {@link #poll()} from a test. */
  public EventFileFollower(Path path, Duration interval, String stepKey, Consumer<String> sink) {
    this.path = Objects.requireNonNull(path, "path");
    this.interval = Objects.requireNonNull(interval, "interval");
    if (interval.isNegative() || interval.isZero()) {
      throw new IllegalArgumentException("poll interval must be positive, was " + interval);
    }
    this.sink = Objects.requireNonNull(sink, "sink");
    this.records = new EventRecords(Objects.requireNonNull(stepKey, "stepKey"));
  }

  /** Polls every interval on a daemon thread of its own. */
  public synchronized EventFileFollower start() {
    if (poller != null) {
      throw new IllegalStateException("already started");
    }
    poller = java.util.concurrent.Executors.newSingleThreadScheduledExecutor(r -> {
      Thread t = new Thread(r, "stepwarden-events-" + path.getFileName());
      t.setDaemon(true);
      return t;
    });
    poller.scheduleWithFixedDelay(this::pollQuietly, 0, Math.max(1, interval.toMillis()),
        java.util.concurrent.TimeUnit.MILLISECONDS);
    return this;
  }

  private void pollQuietly() {
    try {
      poll();
    } catch (IOException e) {
      // keep following: the file may appear or come back
    }
  }

  /** One poll: reads what was appended; returns the number of lines delivered. */
  public synchronized int poll() throws IOException {
    long before = lines;
    Path target = target();
    if (target == null) {
      return 0;
    }
    if (!target.equals(current)) {
      if (current != null) {
        readFrom(current); // the old file to its end first
      }
      switchTo(target);
    }
    readFrom(target);
    return (int) (lines - before);
  }

  private void switchTo(Path target) {
    current = target;
    fileKey = null;
    position = 0;
    accLen = 0;
  }

  /** The file to follow now, or null when there is none yet. */
  private Path target() throws IOException {
    if (!Files.isDirectory(path)) {
      return Files.exists(path) ? path : null;
    }
    Path best = null;
    long bestTime = Long.MIN_VALUE;
    try (DirectoryStream<Path> in = Files.newDirectoryStream(path, PREFIX + "*")) {
      for (Path p : in) {
        BasicFileAttributes a;
        try {
          a = Files.readAttributes(p, BasicFileAttributes.class);
        } catch (NoSuchFileException e) {
          continue;
        }
        long t = a.lastModifiedTime().toMillis();
        if (a.isRegularFile() && (best == null || t > bestTime
            || (t == bestTime && p.getFileName().toString()
                .compareTo(best.getFileName().toString()) > 0))) {
          best = p;
          bestTime = t;
        }
      }
    }
    // stay with the current file until a newer one has been written to
    if (current != null && best != null && !best.equals(current) && Files.exists(current)
        && Files.getLastModifiedTime(current).toMillis() > bestTime) {
      return current;
    }
    return best;
  }

  private void readFrom(Path file) throws IOException {
    BasicFileAttributes a;
    try {
      a = Files.readAttributes(file, BasicFileAttributes.class);
    } catch (NoSuchFileException e) {
      return;
    }
    if ((fileKey != null && !fileKey.equals(a.fileKey())) || a.size() < position) {
      position = 0; // replaced or truncated: read again from the start
      accLen = 0;
    }
    fileKey = a.fileKey();
    if (a.size() == position) {
      return;
    }
    try (FileChannel ch = FileChannel.open(file, StandardOpenOption.READ)) {
      ch.position(position);
      while (true) {
        buf.clear();
        int n = ch.read(buf);
        if (n <= 0) {
          break;
        }
        position += n;
        if (accLen + n > acc.length) {
          acc = Arrays.copyOf(acc, Math.max(acc.length * 2, accLen + n));
        }
        System.arraycopy(buf.array(), 0, acc, accLen, n);
        accLen += n;
        int used = records.read(acc, 0, accLen, line -> {
          lines++;
          sink.accept(line);
        });
        System.arraycopy(acc, used, acc, 0, accLen - used);
        accLen -= used;
      }
    }
  }

  public long lines() {
    return lines;
  }

  /**
   * Reads a whole event file as it is now (replay): each event with scalars as a JSON line, the
   * step under {@code stepKey}. A record not yet whole at the end is left out.
   */
  public static void readAll(Path file, String stepKey, Consumer<String> lines)
      throws IOException {
    byte[] b = Files.readAllBytes(file);
    new EventRecords(stepKey).read(b, 0, b.length, lines);
  }

  /** Whether {@code file} begins with a TFRecord length header whose CRC matches. */
  public static boolean looksLikeEvents(Path file) throws IOException {
    byte[] head = new byte[12];
    try (java.io.InputStream in = Files.newInputStream(file)) {
      if (in.readNBytes(head, 0, 12) < 12) {
        return false;
      }
    }
    return EventRecords.maskedCrc(head, 0, 8) == EventRecords.le32(head, 8);
  }

  /** Records passed over because a CRC did not match. */
  public synchronized long corruptRecords() {
    return records.corruptRecords();
  }

  /** Stops following after one last poll (the events written before close). */
  @Override
  public void close() {
    java.util.concurrent.ScheduledExecutorService p;
    synchronized (this) {
      p = poller;
    }
    if (p != null) {
      p.shutdown();
      try {
        p.awaitTermination(5, java.util.concurrent.TimeUnit.SECONDS);
      } catch (InterruptedException e) {
        Thread.currentThread().interrupt();
      }
      pollQuietly();
    }
  }
}
