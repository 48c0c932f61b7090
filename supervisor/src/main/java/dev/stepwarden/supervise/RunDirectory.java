package dev.stepwarden.supervise;

import dev.stepwarden.rundir.RunLock;
import java.io.IOException;
import java.nio.file.FileAlreadyExistsException;
import java.nio.file.Files;
import java.nio.file.Path;
import java.nio.file.attribute.PosixFilePermissions;
import java.time.Instant;
import java.time.ZoneOffset;
import java.time.format.DateTimeFormatter;

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
    return new RunDirectory(root, RunLock.acquire(root));
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

  /** Creates {@code file} empty with owner-only permissions, if it does not exist yet. */
  public Path privateFile(String name) throws IOException {
    Path p = root.resolve(name);
    if (!Files.exists(p)) {
      try {
        Files.createFile(p, PosixFilePermissions.asFileAttribute(
            PosixFilePermissions.fromString("rw-------")));
      } catch (UnsupportedOperationException e) {
        Files.createFile(p);
      }
    }
    return p;
  }

  static void createPrivateDirectories(Path dir) throws IOException {
    if (Files.isDirectory(dir)) {
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
