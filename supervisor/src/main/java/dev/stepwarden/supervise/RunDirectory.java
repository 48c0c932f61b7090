package dev.stepwarden.supervise;

import dev.stepwarden.rundir.RunLock;
import java.io.IOException;
import java.nio.file.FileAlreadyExistsException;
import java.nio.file.Files;
import java.nio.file.LinkOption;
import java.nio.file.Path;
import java.nio.file.attribute.PosixFilePermissions;
import java.time.Instant;
import java.time.ZoneOffset;
import java.time.format.DateTimeFormatter;
import java.util.List;

/**
 * The layout of a run directory: everything the next morning needs, in one place.
 *
 * <p>A supervisor holds the directory's {@link RunLock} for the run's life: a second {@code run}
 * or {@code run --resume} of the same directory is refused at once, naming the live process.
 *
 * <p>Files are created owner-only (0600) and folders 0700 where the file system supports POSIX
 * permissions: logs and commands may hold secrets from the trainer's environment.
 */
public final class RunDirectory {
  public static final String GUARDS = "guards.yaml";
  public static final String COMMAND = "command.json";
  public static final String STDOUT = "trainer.stdout.log";
  public static final String STDERR = "trainer.stderr.log";
  public static final String METRICS = "metrics.jsonl";
  public static final String AUDIT = "audit.jsonl";
  public static final String CONTROL = "control.json";
  public static final String STATE = "state.json";
  public static final String VAULT = "vault";

  private final Path root;
  private final RunLock lock;

  private RunDirectory(Path root, RunLock lock) {
    this.root = root;
    this.lock = lock;
  }

  /** Creates {@code dir} (or a fresh timestamped folder under ./runs when null). */
  public static RunDirectory create(Path dir, String runName, Instant now) throws IOException {
    Path root = dir;
    if (root == null) {
      String stamp = DateTimeFormatter.ofPattern("yyyyMMdd-HHmmss").withZone(ZoneOffset.UTC)
          .format(now);
      root = Path.of("runs", runName.replaceAll("[^A-Za-z0-9._-]", "_") + "-" + stamp);
    }
    root = root.toAbsolutePath().normalize();
    createPrivateDirectories(root);
    // The lock first: a live supervisor is named, not mistaken for a finished run.
    RunLock lock = RunLock.acquire(root);
    try {
      refuseLinkedEntries(root); // first: a linked audit.jsonl is named as a link
      if (Files.exists(root.resolve(AUDIT))) {
        throw new FileAlreadyExistsException(root.toString(), null, "this run directory already"
            + " holds a run; choose another --run-dir, or continue it with run --resume");
      }
      createPrivateDirectories(root.resolve(VAULT));
    } catch (IOException | RuntimeException e) {
      lock.close();
      throw e;
    }
    return new RunDirectory(root, lock);
  }

  /** Every file a run writes, for the check that none of them is a planted link. */
  private static final List<String> ENTRIES = List.of(GUARDS, COMMAND, STDOUT, STDERR, METRICS,
      AUDIT, CONTROL, STATE);

  /** Refuses, before anything is written, any of the run's entries that is a link. */
  private static void refuseLinkedEntries(Path root) throws IOException {
    for (String name : ENTRIES) {
      Path p = root.resolve(name);
      if (Files.exists(p, LinkOption.NOFOLLOW_LINKS)) {
        refuseLink(p);
      }
    }
  }

  /** Opens an existing run directory to read it (report), without taking its lock. */
  public static RunDirectory existing(Path dir) {
    return new RunDirectory(dir.toAbsolutePath().normalize(), null);
  }

  /**
   * Opens an existing run directory to continue its run, holding its lock.
   *
   * @throws dev.stepwarden.rundir.RunBusyException when a live supervisor holds the run
   */
  public static RunDirectory resumed(Path dir) throws IOException {
    Path root = dir.toAbsolutePath().normalize();
    createPrivateDirectories(root); // refuses a run directory that is a link
    RunLock lock = RunLock.acquire(root);
    try {
      createPrivateDirectories(root.resolve(VAULT));
      refuseLinkedEntries(root);
    } catch (IOException | RuntimeException e) {
      lock.close();
      throw e;
    }
    return new RunDirectory(root, lock);
  }

  /** Releases the run's lock, if this supervisor holds it. */
  public void release() throws IOException {
    if (lock != null) {
      lock.close();
    }
  }

  public Path root() {
    return root;
  }

  public Path file(String name) {
    return root.resolve(name);
  }

  /**
   * Creates {@code file} empty with owner-only permissions, if it does not exist yet. An entry
   * of that name that is a symbolic link, a hard link (a second name of another file) or not a
   * regular file is refused, so nothing of the run is ever written through it to another file.
   */
  public Path privateFile(String name) throws IOException {
    Path p = root.resolve(name);
    if (!Files.exists(p, LinkOption.NOFOLLOW_LINKS)) {
      try {
        Files.createFile(p, PosixFilePermissions.asFileAttribute(
            PosixFilePermissions.fromString("rw-------")));
      } catch (UnsupportedOperationException e) {
        Files.createFile(p);
      }
    }
    refuseLink(p);
    return p;
  }

  /** Refuses a run-directory entry that would lead our writes to another file. */
  static void refuseLink(Path p) throws IOException {
    if (Files.isSymbolicLink(p)) {
      throw new FileAlreadyExistsException(p.toString(), null,
          "is a symbolic link; stepwarden never writes a run's files through links"
          + " (remove the link, or choose a fresh --run-dir)");
    }
    if (!Files.isRegularFile(p, LinkOption.NOFOLLOW_LINKS)) {
      throw new FileAlreadyExistsException(p.toString(), null,
          "is not a regular file (remove it, or choose a fresh --run-dir)");
    }
    Object links;
    try {
      links = Files.getAttribute(p, "unix:nlink", LinkOption.NOFOLLOW_LINKS);
    } catch (UnsupportedOperationException | IllegalArgumentException e) {
      return; // no link counts here (not a Unix file system)
    }
    if (links instanceof Integer n && n > 1) {
      throw new FileAlreadyExistsException(p.toString(), null, "has " + n
          + " names (a hard link to another file); stepwarden never writes a run's files"
          + " through links (remove it, or choose a fresh --run-dir)");
    }
  }

  static void createPrivateDirectories(Path dir) throws IOException {
    if (Files.isSymbolicLink(dir)) {
      throw new FileAlreadyExistsException(dir.toString(), null,
          "is a symbolic link; a run directory and its vault are never reached through links"
          + " (remove it, or choose another --run-dir)");
    }
    if (Files.isDirectory(dir, LinkOption.NOFOLLOW_LINKS)) {
      return;
    }
    Path parent = dir.getParent();
    if (parent != null && !Files.isDirectory(parent)) {
      Files.createDirectories(parent);
    }
    try {
      Files.createDirectory(dir, PosixFilePermissions.asFileAttribute(
          PosixFilePermissions.fromString("rwx------")));
    } catch (UnsupportedOperationException e) {
      Files.createDirectory(dir);
    }
  }
}
