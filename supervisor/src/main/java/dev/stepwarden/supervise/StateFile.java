package dev.stepwarden.supervise;

import dev.stepwarden.checkpoints.CheckpointLedger;
import dev.stepwarden.engine.GuardEngineState;
import dev.stepwarden.rules.GuardFile;
import java.io.IOException;
import java.nio.ByteBuffer;
import java.nio.channels.FileChannel;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.NoSuchFileException;
import java.nio.file.Path;
import java.nio.file.StandardCopyOption;
import java.nio.file.StandardOpenOption;
import java.nio.file.attribute.PosixFilePermissions;
import java.time.Duration;
import java.util.ArrayList;
import java.util.LinkedHashMap;
import java.util.List;
import java.util.Map;
import java.util.Set;
import tools.jackson.core.JacksonException;
import tools.jackson.databind.JsonNode;
import tools.jackson.databind.json.JsonMapper;

/**
 * {@code state.json}: what {@code run --resume} needs after the supervisor died. Replaced
 * atomically (write a sibling, force it to disk, rename), so a reader finds the old state or the
 * new one, never half of one. Non-finite numbers are written as null.
 */
final class StateFile {
  static final int VERSION = 1;
  private static final JsonMapper JSON = JsonMapper.builder().build();

  private StateFile() {}

  static void write(Path file, Map<String, Object> state) throws IOException {
    byte[] bytes = (JSON.writerWithDefaultPrettyPrinter().writeValueAsString(state) + "\n")
        .getBytes(StandardCharsets.UTF_8);
    Path tmp = file.resolveSibling(file.getFileName() + ".tmp");
    Files.deleteIfExists(tmp); // our own temporary file
    try (FileChannel ch = FileChannel.open(tmp, Set.of(StandardOpenOption.CREATE_NEW,
        StandardOpenOption.WRITE), PosixFilePermissions.asFileAttribute(
            PosixFilePermissions.fromString("rw-------")))) {
      ByteBuffer buf = ByteBuffer.wrap(bytes);
      while (buf.hasRemaining()) {
        ch.write(buf);
      }
      ch.force(true);
    }
    Files.move(tmp, file, StandardCopyOption.ATOMIC_MOVE, StandardCopyOption.REPLACE_EXISTING);
  }

  static JsonNode read(Path file) throws IOException {
    try {
      JsonNode n = JSON.readTree(Files.readString(file, StandardCharsets.UTF_8));
      if (n == null || !n.isObject() || n.path("version").asInt(0) != VERSION) {
        throw new IOException(file + " is not a stepwarden state file of version " + VERSION);
      }
      return n;
    } catch (NoSuchFileException e) {
      throw new IOException("no " + file.getFileName() + " in " + file.getParent()
          + ": this is not a run directory, or its supervisor died before the first launch", e);
    } catch (JacksonException e) {
      throw new IOException(file + " is damaged (" + e.getOriginalMessage() + "); it is"
          + " replaced atomically, so it was edited or the disk failed", e);
    }
  }

  static Object num(double v) {
    return Double.isFinite(v) ? v : null;
  }

  static double dbl(JsonNode n) {
    return n == null || n.isNull() || n.isMissingNode() ? Double.NaN : n.asDouble();
  }

  static Map<String, Object> run(GuardFile.Run r) {
    Map<String, Object> m = new LinkedHashMap<>();
    m.put("name", r.name());
    m.put("command", r.command());
    m.put("learning_rate", r.learningRate());
    m.put("workdir", r.workdir() == null ? null : r.workdir().toAbsolutePath().toString());
    m.put("env", r.env());
    m.put("stop_grace_ms", r.stopGrace() == null ? null : r.stopGrace().toMillis());
    return m;
  }

  static GuardFile.Run run(JsonNode n) {
    List<String> cmd = new ArrayList<>();
    n.path("command").forEach(w -> cmd.add(w.asString()));
    Map<String, String> env = new LinkedHashMap<>();
    n.path("env").properties().forEach(e -> env.put(e.getKey(), e.getValue().asString()));
    JsonNode wd = n.path("workdir");
    JsonNode grace = n.path("stop_grace_ms");
    return new GuardFile.Run(n.path("name").asString(), cmd, n.path("learning_rate").asDouble(),
        wd.isNull() || wd.isMissingNode() ? null : Path.of(wd.asString()), env,
        grace.isNull() || grace.isMissingNode() ? null : Duration.ofMillis(grace.asLong()));
  }

  static Map<String, Object> engine(GuardEngineState s) {
    Map<String, Object> m = new LinkedHashMap<>();
    m.put("rate", s.rate());
    m.put("rewinds", s.rewinds());
    m.put("samples", s.samples());
    m.put("best_validation", num(s.bestValidation()));
    m.put("best_validation_step", s.bestValidationStep());
    Map<String, Object> rests = new LinkedHashMap<>();
    s.rests().forEach((k, v) -> rests.put(k, List.of(v[0], v[1])));
    m.put("rests", rests);
    return m;
  }

  static GuardEngineState engine(JsonNode n) {
    Map<String, long[]> rests = new LinkedHashMap<>();
    n.path("rests").properties().forEach(e -> rests.put(e.getKey(),
        new long[] {e.getValue().path(0).asLong(), e.getValue().path(1).asLong()}));
    return new GuardEngineState(n.path("rate").asDouble(), n.path("rewinds").asInt(),
        n.path("samples").asLong(), dbl(n.get("best_validation")),
        n.path("best_validation_step").asLong(-1), rests);
  }

  static Map<String, Object> entry(CheckpointLedger.Entry e) {
    Map<String, Object> m = new LinkedHashMap<>();
    m.put("path", e.path().toString());
    m.put("step", e.step());
    m.put("wall_millis", e.wallMillis());
    m.put("size", e.size());
    m.put("sha256", e.sha256());
    m.put("train", num(e.train()));
    m.put("validation", num(e.validation()));
    m.put("healthy", e.healthy());
    m.put("vault", e.vault() == null ? null : e.vault().toString());
    m.put("state", e.state());
    m.put("step_from", e.stepFrom());
    return m;
  }

  static CheckpointLedger.Entry entry(JsonNode n) {
    JsonNode v = n.path("vault");
    return new CheckpointLedger.Entry(Path.of(n.path("path").asString()), n.path("step").asLong(),
        n.path("wall_millis").asLong(), n.path("size").asLong(), n.path("sha256").asString(),
        dbl(n.get("train")), dbl(n.get("validation")), n.path("healthy").asBoolean(),
        v.isNull() || v.isMissingNode() ? null : Path.of(v.asString()),
        n.path("state").asString(CheckpointLedger.OK),
        n.path("step_from").asString(CheckpointLedger.STEP_FROM_TRAINER));
  }

  static Map<String, Object> seen(CheckpointLedger.Seen s) {
    Map<String, Object> m = new LinkedHashMap<>();
    m.put("path", s.path().toString());
    m.put("size", s.size());
    m.put("modified_millis", s.modifiedMillis());
    return m;
  }

  static CheckpointLedger.Seen seen(JsonNode n) {
    return new CheckpointLedger.Seen(Path.of(n.path("path").asString()), n.path("size").asLong(),
        n.path("modified_millis").asLong());
  }
}
