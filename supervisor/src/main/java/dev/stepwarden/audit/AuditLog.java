package dev.stepwarden.audit;

import java.io.Closeable;
import java.io.IOException;
import java.nio.ByteBuffer;
import java.nio.channels.FileChannel;
import java.nio.charset.StandardCharsets;
import java.nio.file.Path;
import java.nio.file.StandardOpenOption;
import java.time.Clock;
import java.time.Instant;
import java.util.LinkedHashMap;
import java.util.Map;
import tools.jackson.databind.json.JsonMapper;

/**
 * The append-only audit log: one JSON object per line, each forced to disk before
 * {@link #append} returns, so a decision is on disk before the action it announces is taken.
 *
 * <p>Design: a record is serialised whole into one buffer and written with one positional write
 * at the end of the file; a crash can tear at most the last line, which {@link AuditReader}
 * reports. Every record gets {@code seq} (1, 2, ...), {@code at} (ISO-8601 wall time from the
 * injected clock) and {@code type}. If the disk is full the write fails with an
 * {@link IOException} naming the file; the caller stops the run safely. Thread-safe.
 */
public final class AuditLog implements Closeable {
  private static final JsonMapper JSON = JsonMapper.builder().build();

  private final Path path;
  private final FileChannel channel;
  private final Clock clock;
  private long seq;

  private AuditLog(Path path, FileChannel channel, Clock clock, long seq) {
    this.path = path;
    this.channel = channel;
    this.clock = clock;
    this.seq = seq;
  }

  /** Opens (or continues) the log at {@code path}; a resumed log continues the sequence. */
  public static AuditLog open(Path path, Clock clock) throws IOException {
    long seq = 0;
    if (java.nio.file.Files.exists(path)) {
      seq = AuditReader.read(path).lastSeq();
    }
    FileChannel ch = FileChannel.open(path, StandardOpenOption.CREATE, StandardOpenOption.WRITE,
        StandardOpenOption.APPEND);
    return new AuditLog(path, ch, clock, seq);
  }

  public Path path() {
    return path;
  }

  /**
   * Appends one typed record and forces it to disk.
   *
   * @return the record's sequence number
   */
  public long append(AuditRecord record) throws IOException {
    return append(record.type(), record.fields());
  }

  /**
   * Appends one record of {@code type} with {@code fields} and forces it to disk.
   *
   * @return the record's sequence number
   */
  public synchronized long append(String type, Map<String, ?> fields) throws IOException {
    long next = seq + 1;
    Map<String, Object> record = new LinkedHashMap<>();
    record.put("seq", next);
    record.put("at", Instant.now(clock).toString());
    record.put("type", type);
    record.putAll(fields);
    byte[] line = (JSON.writeValueAsString(record) + "\n").getBytes(StandardCharsets.UTF_8);
    ByteBuffer buf = ByteBuffer.wrap(line);
    long before = channel.size();
    try {
      while (buf.hasRemaining()) {
        channel.write(buf);
      }
      channel.force(false);
    } catch (IOException e) {
      // A partial write (ENOSPC half-way) would leave a torn record: take it back.
      try {
        channel.truncate(before);
        channel.force(false);
      } catch (IOException ignored) {
        // the reader still reports a torn last line
      }
      throw new IOException("cannot write the audit log " + path + ": " + e.getMessage()
          + " (is the disk full?)", e);
    }
    seq = next;
    return next;
  }

  @Override
  public synchronized void close() throws IOException {
    channel.close();
  }
}
