package dev.stepwarden.control;

import java.io.IOException;
import java.nio.ByteBuffer;
import java.nio.channels.FileChannel;
import java.nio.charset.StandardCharsets;
import java.nio.file.AtomicMoveNotSupportedException;
import java.nio.file.Files;
import java.nio.file.Path;
import java.nio.file.StandardCopyOption;
import java.nio.file.StandardOpenOption;
import java.util.LinkedHashMap;
import java.util.Map;
import java.util.Set;
import java.nio.file.attribute.PosixFilePermissions;
import tools.jackson.databind.json.JsonMapper;

/**
 * The control file: how a new learning rate reaches a trainer that listens.
 *
 * <p>Protocol (ours): the trainer finds the path in {@code STEPWARDEN_CONTROL} and polls its
 * modification time. The supervisor never edits the file in place: it writes a sibling temporary
 * file, forces it to disk and renames it over the old one, so a trainer reads either the old or
 * the new revision, never half of one. Content:
 * {@code {"revision": 4, "protocol": 1, "learning_rate": 0.025, "guard": "flat-validation",
 * "at_step": 41200}}.
 * The trainer confirms by reporting the new rate or {@code "applied_revision": 4} in its output.
 */
public final class ControlFile {
  private static final JsonMapper JSON = JsonMapper.builder().build();

  /**
   * The version of the control-file protocol, written into every control file as
   * {@code "protocol"}; the shipped helpers carry the version they follow and warn when a file
   * is newer. Raise it when the file's meaning changes in a way an older helper would misread.
   */
  public static final int PROTOCOL = 1;

  /** The key that asks the trainer to write a checkpoint now (its value: the revision). */
  public static final String CHECKPOINT_REQUEST_KEY = "checkpoint_request";

  /** Where the trainer helpers live in the jar ({@code stepwarden helper} prints them). */
  public static final String PYTHON_HELPER = "/dev/stepwarden/control/stepwarden_control.py";

  public static final String JAVA_HELPER = "/dev/stepwarden/control/StepwardenControl.java";

  private final Path path;
  private long revision;

  public ControlFile(Path path, long revision) {
    this.path = path;
    this.revision = revision;
  }

  public Path path() {
    return path;
  }

  /** The last revision written (0 before the first). */
  public synchronized long revision() {
    return revision;
  }

  /** Publishes a new rate atomically; returns its revision number. */
  public synchronized long publish(double learningRate, String guard, long atStep)
      throws IOException {
    return write(learningRate, guard, atStep, false);
  }

  /**
   * Publishes the current rate again with {@code "checkpoint_request": REVISION}: the supervisor
   * is about to be pre-empted and asks the trainer to save a checkpoint now. A trainer that does
   * not know the key just sees an unchanged rate.
   */
  public synchronized long requestCheckpoint(double learningRate, String reason, long atStep)
      throws IOException {
    return write(learningRate, reason, atStep, true);
  }

  private long write(double learningRate, String guard, long atStep, boolean checkpoint)
      throws IOException {
    long next = revision + 1;
    Map<String, Object> body = new LinkedHashMap<>();
    body.put("revision", next);
    body.put("protocol", PROTOCOL);
    body.put("learning_rate", learningRate);
    body.put("guard", guard);
    body.put("at_step", atStep);
    if (checkpoint) {
      body.put(CHECKPOINT_REQUEST_KEY, next);
    }
    write(JSON.writeValueAsString(body) + "\n");
    revision = next;
    return next;
  }

  private void write(String content) throws IOException {
    Path tmp = path.resolveSibling(path.getFileName() + ".tmp");
    Files.deleteIfExists(tmp); // our own temporary file, never the user's
    try (FileChannel ch = FileChannel.open(tmp, Set.of(StandardOpenOption.CREATE_NEW,
        StandardOpenOption.WRITE), PosixFilePermissions.asFileAttribute(
            PosixFilePermissions.fromString("rw-------")))) {
      ByteBuffer buf = ByteBuffer.wrap(content.getBytes(StandardCharsets.UTF_8));
      while (buf.hasRemaining()) {
        ch.write(buf);
      }
      ch.force(true);
    }
    try {
      Files.move(tmp, path, StandardCopyOption.ATOMIC_MOVE, StandardCopyOption.REPLACE_EXISTING);
    } catch (AtomicMoveNotSupportedException e) {
      throw new IOException("the run directory's file system cannot rename atomically; put the"
          + " run directory on a local disk (" + path + ")", e);
    }
  }
}
