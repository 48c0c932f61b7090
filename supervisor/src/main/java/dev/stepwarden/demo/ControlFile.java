package dev.stepwarden.demo;

import java.io.IOException;
import java.io.PrintStream;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.NoSuchFileException;
import java.nio.file.Path;
import java.nio.file.attribute.BasicFileAttributes;
import java.util.Arrays;
import java.util.HashSet;
import java.util.Objects;
import java.util.Set;
import tools.jackson.databind.JsonNode;
import tools.jackson.databind.json.JsonMapper;

/**
 * The trainer's side of the control-file protocol. Before each step the trainer calls {@link
 * #poll}; it looks at the file's identity, modification time and size (one {@code stat}), and reads
 * the file only when one of them changed. The supervisor replaces the file by rename, so the
 * identity (inode) changes even when a rewrite lands in the same clock tick with the same size.
 *
 * <p>A missing file is normal (no intervention yet). An unreadable, partial or invalid one is
 * skipped with one warning on stderr per distinct bad content or revision, and training goes on.
 */
final class ControlFile {
  private final Path path;
  private final PrintStream warnings;
  private final Set<String> warned = new HashSet<>();
  private Object lastStamp;

  /** A valid instruction read from the file. */
  record Instruction(long revision, double learningRate) {}

  ControlFile(Path path, PrintStream warnings) {
    this.path = path;
    this.warnings = warnings;
  }

  Path path() {
    return path;
  }

  /**
   * The file's instruction if the file changed since the last poll and holds a valid revision
   * newer than {@code appliedRevision}; otherwise null.
   */
  Instruction poll(long appliedRevision) {
    Object stamp = stamp();
    if (stamp == null) {
      lastStamp = null;
      return null;
    }
    if (stamp.equals(lastStamp)) {
      return null;
    }
    String text;
    try {
      text = Files.readString(path, StandardCharsets.UTF_8);
    } catch (NoSuchFileException e) {
      return null; // replaced between stat and read: the next poll sees the new file
    } catch (IOException | RuntimeException e) {
      lastStamp = stamp;
      warnOnce("io:" + stamp, "cannot read control file " + path + " (" + e.getMessage()
          + "); keeping the current rate");
      return null;
    }
    lastStamp = stamp;
    Instruction instruction = parse(text);
    return instruction != null && instruction.revision() > appliedRevision ? instruction : null;
  }

  private Object stamp() {
    try {
      BasicFileAttributes a = Files.readAttributes(path, BasicFileAttributes.class);
      return Arrays.asList(a.fileKey(), a.lastModifiedTime(), a.size()); // fileKey may be null
    } catch (IOException e) {
      return null;
    }
  }

  private Instruction parse(String text) {
    JsonNode root;
    try {
      root = JsonMapper.shared().readTree(text);
    } catch (RuntimeException e) {
      warnOnce("text:" + text, "control file " + path + " is not valid JSON (half written?),"
          + " ignoring it until it changes: " + abbreviate(text));
      return null;
    }
    if (root == null || !root.isObject()) {
      warnOnce("text:" + text, "control file " + path + " must hold a JSON object like"
          + " {\"revision\": 1, \"learning_rate\": 0.05}, found: " + abbreviate(text));
      return null;
    }
    JsonNode revision = root.get("revision");
    if (revision == null || !revision.isIntegralNumber() || !revision.canConvertToLong()
        || revision.asLong() < 1) {
      warnOnce("text:" + text, "control file " + path + " needs \"revision\" as a positive"
          + " integer, found: " + abbreviate(text));
      return null;
    }
    long rev = revision.asLong();
    JsonNode rate = root.get("learning_rate");
    if (rate == null || !rate.isNumber() || !(rate.asDouble() > 0) || !Double.isFinite(rate.asDouble())) {
      warnOnce("rev:" + rev, "control file " + path + " revision " + rev
          + " needs \"learning_rate\" as a positive finite number, found: " + abbreviate(text)
          + "; keeping the current rate");
      return null;
    }
    return new Instruction(rev, rate.asDouble());
  }

  private void warnOnce(String key, String message) {
    if (warned.add(Objects.requireNonNull(key))) {
      warnings.println("demo trainer: warning: " + message);
      warnings.flush();
    }
  }

  private static String abbreviate(String text) {
    String oneLine = text.strip().replaceAll("\\s+", " ");
    return oneLine.length() <= 120 ? oneLine : oneLine.substring(0, 117) + "...";
  }
}
