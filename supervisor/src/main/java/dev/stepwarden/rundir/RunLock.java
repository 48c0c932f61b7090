package dev.stepwarden.rundir;

import java.io.IOException;
import java.nio.ByteBuffer;
import java.nio.channels.FileChannel;
import java.nio.channels.FileLock;
import java.nio.channels.OverlappingFileLockException;
import java.nio.charset.StandardCharsets;
import java.nio.file.FileSystemException;
import java.nio.file.Files;
import java.nio.file.LinkOption;
import java.nio.file.OpenOption;
import java.nio.file.Path;
import java.nio.file.StandardOpenOption;
import java.nio.file.attribute.FileAttribute;
import java.nio.file.attribute.PosixFilePermissions;
import java.time.Instant;
import java.util.Map;
import java.util.Optional;
import java.util.Set;
import java.util.concurrent.ConcurrentHashMap;

/**
 * One supervisor per run directory: an OS lock ({@code fcntl} through {@link FileChannel#tryLock})
 * on {@code RUN_DIR/supervisor.lock}, held for the run's whole life and released by the kernel
 * when the process dies, even by {@code kill -9}; a stale lock file therefore never blocks a
 * resume. The file names its holder (pid, host, since when) so a refusal can say who is running.
 *
 * <p>The JVM refuses a second lock on one file from the same process (a serve runs many runs in
 * one JVM), so locks held here are also listed in a process-wide map and checked first. The lock
 * file is opened without following links: a link planted under its name is refused.
 */
public final class RunLock implements AutoCloseable {
  /** The lock file's name inside the run directory. */
  public static final String FILE = "supervisor.lock";

  private static final Map<Path, String> HELD_HERE = new ConcurrentHashMap<>();
  private static final int MAX_HOLDER_BYTES = 4096;

  private final Path root;
  private final FileChannel channel;
  private final FileLock lock;

  private RunLock(Path root, FileChannel channel, FileLock lock) {
    this.root = root;
    this.channel = channel;
    this.lock = lock;
  }

  /**
   * Takes the run directory's lock for this process, or refuses at once naming the live holder.
   * The directory must exist.
   *
   * @throws RunBusyException when another live supervisor holds it
   */
  public static RunLock acquire(Path runDir) throws IOException {
    Path root = runDir.toAbsolutePath().normalize();
    String self = describeSelf();
    String here = HELD_HERE.putIfAbsent(root, self);
    if (here != null) {
      throw new RunBusyException(root, here + " (this same process)");
    }
    FileChannel ch = null;
    try {
      ch = open(root.resolve(FILE));
      FileLock l;
      try {
        l = ch.tryLock();
      } catch (OverlappingFileLockException e) {
        l = null;
      }
      if (l == null) {
        String holder = readHolder(ch);
        throw new RunBusyException(root, holder.isEmpty() ? "another process" : holder);
      }
      ch.truncate(0);
      ch.write(ByteBuffer.wrap((self + "\n").getBytes(StandardCharsets.UTF_8)), 0);
      ch.force(false);
      return new RunLock(root, ch, l);
    } catch (IOException | RuntimeException e) {
      HELD_HERE.remove(root, self);
      if (ch != null) {
        ch.close();
      }
      throw e;
    }
  }

  /**
   * Who holds the run directory's lock right now, if anyone alive does; empty when the run is
   * not being supervised (never started, ended, or its supervisor died). Takes nothing.
   */
  public static Optional<String> liveHolder(Path runDir) throws IOException {
    Path root = runDir.toAbsolutePath().normalize();
    String here = HELD_HERE.get(root);
    if (here != null) {
      return Optional.of(here + " (this same process)");
    }
    Path file = root.resolve(FILE);
    if (!Files.exists(file, LinkOption.NOFOLLOW_LINKS)) {
      return Optional.empty();
    }
    try (FileChannel ch = FileChannel.open(file, StandardOpenOption.READ,
        StandardOpenOption.WRITE, LinkOption.NOFOLLOW_LINKS)) {
      FileLock l;
      try {
        l = ch.tryLock();
      } catch (OverlappingFileLockException e) {
        l = null;
      }
      if (l != null) {
        l.release();
        return Optional.empty();
      }
      String holder = readHolder(ch);
      return Optional.of(holder.isEmpty() ? "another process" : holder);
    } catch (IOException e) {
      throw refusal(file, e);
    }
  }

  public Path runDir() {
    return root;
  }

  /** Releases the lock (the file stays: a later resume takes it again). */
  @Override
  public void close() throws IOException {
    try {
      if (lock.isValid()) {
        lock.release();
      }
      channel.close();
    } finally {
      HELD_HERE.remove(root);
    }
  }

  private static FileChannel open(Path file) throws IOException {
    Set<OpenOption> opts = Set.of(StandardOpenOption.CREATE, StandardOpenOption.READ,
        StandardOpenOption.WRITE, LinkOption.NOFOLLOW_LINKS);
    try {
      FileAttribute<?> mode = PosixFilePermissions.asFileAttribute(
          PosixFilePermissions.fromString("rw-------"));
      return FileChannel.open(file, opts, mode);
    } catch (UnsupportedOperationException e) {
      return FileChannel.open(file, opts);
    } catch (IOException e) {
      throw refusal(file, e);
    }
  }

  /** A link planted under the lock's name makes the open fail (ELOOP): say so plainly. */
  private static IOException refusal(Path file, IOException e) {
    if (Files.isSymbolicLink(file)) {
      return new FileSystemException(file.toString(), null, "is a symbolic link; a run"
          + " directory's files are never opened through links (remove the link)");
    }
    return e;
  }

  private static String readHolder(FileChannel ch) throws IOException {
    ByteBuffer b = ByteBuffer.allocate(MAX_HOLDER_BYTES);
    ch.read(b, 0);
    return new String(b.array(), 0, b.position(), StandardCharsets.UTF_8).strip();
  }

  private static String describeSelf() {
    ProcessHandle me = ProcessHandle.current();
    String host;
    try { // the kernel's name: no DNS lookup on the way to a run's start
      host = Files.readString(Path.of("/proc/sys/kernel/hostname")).strip();
    } catch (IOException | RuntimeException e) {
      host = "";
    }
    host = host.isEmpty() ? "this host" : host;
    String since = me.info().startInstant().map(Instant::toString).orElse("?");
    return "process " + me.pid() + " on " + host + " (since " + since + ")";
  }
}
