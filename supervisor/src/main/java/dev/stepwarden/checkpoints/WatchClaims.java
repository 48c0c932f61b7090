package dev.stepwarden.checkpoints;

import java.io.IOException;
import java.nio.ByteBuffer;
import java.nio.channels.FileChannel;
import java.nio.channels.FileLock;
import java.nio.channels.OverlappingFileLockException;
import java.nio.charset.StandardCharsets;
import java.nio.file.DirectoryStream;
import java.nio.file.FileSystems;
import java.nio.file.Files;
import java.nio.file.LinkOption;
import java.nio.file.Path;
import java.nio.file.PathMatcher;
import java.nio.file.StandardOpenOption;
import java.nio.file.attribute.PosixFilePermissions;
import java.util.ArrayList;
import java.util.List;
import java.util.Optional;
import java.util.Map;
import java.util.UUID;
import java.util.concurrent.ConcurrentHashMap;

/**
 * Which live runs of this user watch which checkpoint files, so that two runs started in one
 * folder with the same {@code checkpoints.watch} (a rate sweep) do not take each other's files.
 *
 * <p>Each live run holds a claim: a small file in a per-user folder
 * ({@code $XDG_RUNTIME_DIR/stepwarden-watches}, else {@code <tmp>/stepwarden-watches-<user>},
 * 0700) naming its run directory and its glob as an absolute pattern, locked by its holder for
 * the run's life (the kernel drops the lock when the holder dies, so a claim whose lock is free
 * is stale and is removed). A checkpoint another live run's glob also matches is shared: the
 * ledger then takes it only when it saw a process of its own trainer's tree writing it.
 */
public final class WatchClaims implements AutoCloseable {
  /** Another live run watching a file: its run directory, for the audit. */
  public record Other(String runDir, PathMatcher matcher) {}

  private static final long RELIST_MILLIS = 2_000;

  private final Path folder;
  private final Path own;
  private final FileChannel channel;
  private final FileLock lock;
  private List<Other> others = List.of();
  private boolean listed;
  private long listedAt;
  /**
   * Claims held in this JVM (a serve runs many runs): read from here, never by opening their
   * file, since closing any channel of a file drops every lock this process holds on it.
   */
  private static final Map<Path, Other> HERE = new ConcurrentHashMap<>();

  private WatchClaims(Path folder, Path own, FileChannel channel, FileLock lock) {
    this.folder = folder;
    this.own = own;
    this.channel = channel;
    this.lock = lock;
  }

  /** The per-user folder of claims. */
  static Path defaultFolder() {
    String xdg = System.getenv("XDG_RUNTIME_DIR");
    if (xdg != null && !xdg.isBlank() && Files.isDirectory(Path.of(xdg))) {
      return Path.of(xdg, "stepwarden-watches");
    }
    return Path.of(System.getProperty("java.io.tmpdir"),
        "stepwarden-watches-" + System.getProperty("user.name", "user"));
  }

  /**
   * Claims {@code absoluteGlob} for the run in {@code runDir} in {@code folder}.
   *
   * @throws IOException when the folder is not a private folder of this user (then the caller
   *     runs without claims and says so)
   */
  public static WatchClaims claim(Path folder, String absoluteGlob, Path runDir)
      throws IOException {
    Path f = privateFolder(folder);
    String name = ProcessHandle.current().pid() + "-" + UUID.randomUUID();
    // Locked and written under a name no listing reads, then renamed (the lock stays with the
    // file): a claim is never seen unlocked and taken for a dead run's.
    Path tmp = f.resolve(name + ".new");
    Path own = f.resolve(name + ".claim");
    FileChannel ch = FileChannel.open(tmp, java.util.Set.of(StandardOpenOption.CREATE_NEW,
        StandardOpenOption.WRITE, StandardOpenOption.READ, LinkOption.NOFOLLOW_LINKS),
        PosixFilePermissions.asFileAttribute(PosixFilePermissions.fromString("rw-------")));
    try {
      FileLock l = ch.lock();
      String text = runDir.toAbsolutePath().normalize() + "\n" + absoluteGlob + "\n";
      ch.write(ByteBuffer.wrap(text.getBytes(StandardCharsets.UTF_8)));
      ch.force(false);
      HERE.put(own, new Other(runDir.toAbsolutePath().normalize().toString(),
          FileSystems.getDefault().getPathMatcher("glob:" + absoluteGlob)));
      Files.move(tmp, own, java.nio.file.StandardCopyOption.ATOMIC_MOVE);
      return new WatchClaims(f, own, ch, l);
    } catch (IOException | RuntimeException e) {
      HERE.remove(own);
      ch.close();
      Files.deleteIfExists(tmp);
      throw e;
    }
  }

  /** Claims in the default per-user folder. */
  public static WatchClaims claim(String absoluteGlob, Path runDir) throws IOException {
    return claim(defaultFolder(), absoluteGlob, runDir);
  }

  /** Another live run whose glob matches {@code file}, if any. */
  public synchronized Optional<Other> sharedWith(Path file, long nowMillis) {
    if (!listed || nowMillis - listedAt >= RELIST_MILLIS || nowMillis < listedAt) {
      others = listOthers();
      listedAt = nowMillis;
      listed = true;
    }
    Path abs = file.toAbsolutePath().normalize();
    return others.stream().filter(o -> o.matcher().matches(abs)).findFirst();
  }

  /** Every other live claim now (stale ones are removed on the way). */
  public synchronized List<Other> others() {
    others = listOthers();
    return others;
  }

  private List<Other> listOthers() {
    List<Other> out = new ArrayList<>();
    try (DirectoryStream<Path> ds = Files.newDirectoryStream(folder, "*.claim")) {
      for (Path p : ds) {
        Other here = HERE.get(p);
        if (here != null) {
          if (!p.equals(own)) {
            out.add(here);
          }
        } else {
          readLive(p).ifPresent(out::add);
        }
      }
    } catch (IOException | RuntimeException e) {
      // the folder went away: no claims can be seen, and this run's own is gone too
    }
    return out;
  }

  private static Optional<Other> readLive(Path p) {
    try (FileChannel ch = FileChannel.open(p, StandardOpenOption.READ, StandardOpenOption.WRITE,
        LinkOption.NOFOLLOW_LINKS)) {
      boolean live;
      try {
        FileLock l = ch.tryLock();
        live = l == null;
        if (l != null) {
          l.release();
        }
      } catch (OverlappingFileLockException e) {
        live = true; // held in this JVM after all: never taken for dead
      }
      if (!live) {
        Files.deleteIfExists(p); // its holder died: a claim of ours, in our folder
        return Optional.empty();
      }
      ByteBuffer b = ByteBuffer.allocate(8192);
      ch.read(b, 0);
      String[] lines = new String(b.array(), 0, b.position(), StandardCharsets.UTF_8)
          .split("\n");
      if (lines.length < 2) {
        return Optional.empty(); // being written right now: seen at the next listing
      }
      return Optional.of(new Other(lines[0],
          FileSystems.getDefault().getPathMatcher("glob:" + lines[1])));
    } catch (IOException | RuntimeException e) {
      return Optional.empty();
    }
  }

  private static Path privateFolder(Path folder) throws IOException {
    Path f = folder.toAbsolutePath().normalize();
    if (!Files.exists(f, LinkOption.NOFOLLOW_LINKS)) {
      try {
        Files.createDirectory(f, PosixFilePermissions.asFileAttribute(
            PosixFilePermissions.fromString("rwx------")));
      } catch (java.nio.file.FileAlreadyExistsException raced) {
        // another run created it at the same moment: checked below like any existing one
      }
    }
    if (!Files.isDirectory(f, LinkOption.NOFOLLOW_LINKS)
        || !Files.getOwner(f, LinkOption.NOFOLLOW_LINKS).getName()
            .equals(System.getProperty("user.name"))
        || !Files.getPosixFilePermissions(f, LinkOption.NOFOLLOW_LINKS)
            .equals(PosixFilePermissions.fromString("rwx------"))) {
      throw new IOException(f + " is not a private folder of this user (0700, not a link)");
    }
    return f;
  }

  /** Ends the claim: its file is removed (another run's next listing no longer sees it). */
  @Override
  public synchronized void close() throws IOException {
    try {
      HERE.remove(own);
      Files.deleteIfExists(own);
      if (lock.isValid()) {
        lock.release();
      }
    } finally {
      channel.close();
    }
  }
}
