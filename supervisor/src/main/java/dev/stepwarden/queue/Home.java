package dev.stepwarden.queue;

import java.io.IOException;
import java.lang.management.ManagementFactory;
import java.nio.ByteBuffer;
import java.nio.channels.FileChannel;
import java.nio.channels.FileLock;
import java.nio.channels.OverlappingFileLockException;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.nio.file.StandardOpenOption;
import java.nio.file.attribute.PosixFilePermission;
import java.nio.file.attribute.PosixFilePermissions;
import java.time.Instant;
import java.util.LinkedHashMap;
import java.util.Map;
import java.util.Set;
import tools.jackson.databind.JsonNode;
import tools.jackson.databind.json.JsonMapper;

/**
 * The embedded queue's folder, reachable by this user alone: created 0700, every file in it
 * created 0600 before anything is written (the database file included, which H2 then fills), and
 * one OS lock ({@code queue.lock}) that whoever opens the database holds: a serve for its whole
 * life, a {@code queue} command for a moment. The lock is the kernel's, so a killed holder frees
 * it; the file names the holder so that a refused second serve can say which one is live.
 *
 * <p>There is no network listener: H2 runs in this process with file locking only (no automatic
 * server mode), and commands reach a running serve through its request folder ({@link Mailbox}).
 */
final class Home {
  static final String DB = "queue.mv.db";
  static final String LOCK = "queue.lock";
  /** Written once the queue's tables exist: a queue was created here (see {@link #checkStore}). */
  static final String MARKER = "queue.created";
  static final String SERVE_AUDIT = "serve-audit.jsonl";
  private static final JsonMapper JSON = JsonMapper.builder().build();
  private static final Set<PosixFilePermission> OWNER_RW =
      PosixFilePermissions.fromString("rw-------");
  private static final Set<PosixFilePermission> OWNER_RWX =
      PosixFilePermissions.fromString("rwx------");

  /** Who holds the lock (read from the lock file). */
  record Holder(String role, long pid, String host, String since) {
    String describe() {
      return ("serve".equals(role) ? "a serve" : "a '" + role + "' command") + " (pid " + pid
          + " on " + host + ", since " + since + ")";
    }
  }

  private final Path dir;
  private FileChannel channel;
  private FileLock lock;

  Home(Path dir) {
    this.dir = dir;
  }

  Path dir() {
    return dir;
  }

  /** Creates the folder 0700 (and tightens an older, wider one) with its runs folder. */
  void prepare(Path runs) throws IOException {
    privateDirectories(dir);
    tighten(dir, OWNER_RWX);
    for (String f : new String[] {DB, LOCK, MARKER, SERVE_AUDIT}) {
      if (Files.exists(dir.resolve(f))) {
        tighten(dir.resolve(f), OWNER_RW); // a store made by an older build was 0644
      }
    }
    privateDirectories(runs);
  }

  /**
   * Takes the queue's lock for {@code role}; null when another process holds it.
   *
   * @throws IOException when the lock file cannot be opened
   */
  Holder tryLock(String role) throws IOException {
    Path p = privateFile(dir.resolve(LOCK));
    FileChannel ch = FileChannel.open(p, StandardOpenOption.READ, StandardOpenOption.WRITE);
    FileLock l;
    try {
      l = ch.tryLock();
    } catch (OverlappingFileLockException sameProcess) {
      l = null; // this JVM holds it already (a test running serve and a command side by side)
    }
    if (l == null) {
      ch.close();
      return holder();
    }
    channel = ch;
    lock = l;
    Map<String, Object> who = new LinkedHashMap<>();
    who.put("role", role);
    who.put("pid", ProcessHandle.current().pid());
    who.put("host", hostName());
    who.put("since", Instant.now().toString());
    ch.truncate(0);
    ch.write(ByteBuffer.wrap((JSON.writeValueAsString(who) + "\n")
        .getBytes(StandardCharsets.UTF_8)), 0);
    ch.force(false);
    return null;
  }

  /** The holder the lock file names (its last holder when nobody holds it now). */
  Holder holder() {
    try {
      JsonNode n = JSON.readTree(Files.readString(dir.resolve(LOCK)));
      return new Holder(n.path("role").asString("?"), n.path("pid").asLong(-1),
          n.path("host").asString("?"), n.path("since").asString("?"));
    } catch (IOException | RuntimeException e) {
      return new Holder("?", -1, "?", "?");
    }
  }

  void unlock() {
    try {
      if (lock != null) {
        lock.release();
      }
      if (channel != null) {
        channel.close();
      }
    } catch (IOException ignored) {
      // closing the channel releases the lock in any case
    } finally {
      lock = null;
      channel = null;
    }
  }

  /**
   * Before H2 opens the file: refuses a missing or empty database where a queue was created
   * before (a silently empty queue would forget every job), and otherwise creates the database
   * file empty with owner-only permissions, which H2 keeps when it fills it.
   */
  void checkStore() throws QueueException, IOException {
    Path db = dir.resolve(DB);
    Path marker = dir.resolve(MARKER);
    boolean empty = !Files.exists(db) || Files.size(db) == 0;
    if (empty && Files.exists(marker)) {
      throw new QueueException("the queue database " + db + " is " + (Files.exists(db)
          ? "empty" : "missing") + ", yet a queue was created in this folder ("
          + Files.readString(marker).strip() + "): restore " + DB + " from a backup; to start"
          + " an empty queue here instead, move " + marker + " away");
    }
    privateFile(db);
  }

  /** Notes that the queue's tables exist now (first open only). */
  void markCreated() throws IOException {
    Path marker = dir.resolve(MARKER);
    if (!Files.exists(marker)) {
      privateFile(marker);
      Files.writeString(marker, "created " + Instant.now() + "\n");
    }
  }

  static Path privateFile(Path p) throws IOException {
    if (!Files.exists(p)) {
      try {
        Files.createFile(p, PosixFilePermissions.asFileAttribute(OWNER_RW));
      } catch (UnsupportedOperationException e) {
        Files.createFile(p);
      } catch (java.nio.file.FileAlreadyExistsException raced) {
        // another process created it a moment ago, with the same permissions
      }
    }
    return p;
  }

  static void privateDirectories(Path d) throws IOException {
    if (Files.isDirectory(d)) {
      return;
    }
    Path parent = d.getParent();
    if (parent != null) {
      Files.createDirectories(parent);
    }
    try {
      Files.createDirectory(d, PosixFilePermissions.asFileAttribute(OWNER_RWX));
    } catch (UnsupportedOperationException e) {
      Files.createDirectory(d);
    } catch (java.nio.file.FileAlreadyExistsException raced) {
      // created by another process meanwhile
    }
  }

  private static void tighten(Path p, Set<PosixFilePermission> perms) throws IOException {
    try {
      if (!Files.getPosixFilePermissions(p).equals(perms)) {
        Files.setPosixFilePermissions(p, perms);
      }
    } catch (UnsupportedOperationException notPosix) {
      // nothing to tighten on this file system
    }
  }

  /** The kernel's host name (no DNS look-up, which can stall in a container). */
  static String hostName() {
    try {
      return Files.readString(Path.of("/proc/sys/kernel/hostname")).strip();
    } catch (IOException e) {
      String n = ManagementFactory.getRuntimeMXBean().getName();
      return n.contains("@") ? n.substring(n.indexOf('@') + 1) : "?";
    }
  }
}
