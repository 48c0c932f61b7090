package dev.stepwarden.audit;

import java.io.IOException;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.ArrayList;
import java.util.List;
import java.util.Map;
import tools.jackson.core.JacksonException;
import tools.jackson.core.type.TypeReference;
import tools.jackson.databind.json.JsonMapper;

/**
 * Reads an audit log back, tolerating a torn last line (the supervisor died mid-write) and
 * saying so. A bad line anywhere else means the file was edited or damaged, and is reported too.
 */
public final class AuditReader {
  private static final JsonMapper JSON = JsonMapper.builder().build();
  private static final TypeReference<Map<String, Object>> MAP = new TypeReference<>() {};

  /**
   * The records of an audit log.
   *
   * @param records the parsed records in file order
   * @param tornLastLine true when the last line was incomplete and was left out
   * @param badLines 1-based numbers of other lines that did not parse
   */
  public record Contents(List<Map<String, Object>> records, boolean tornLastLine,
      List<Integer> badLines) {
    public Contents {
      records = List.copyOf(records);
      badLines = List.copyOf(badLines);
    }

    public long lastSeq() {
      if (records.isEmpty()) {
        return 0;
      }
      Object s = records.get(records.size() - 1).get("seq");
      return s instanceof Number n ? n.longValue() : records.size();
    }
  }

  private AuditReader() {}

  public static Contents read(Path path) throws IOException {
    byte[] bytes = Files.readAllBytes(path);
    String text = new String(bytes, StandardCharsets.UTF_8);
    List<Map<String, Object>> records = new ArrayList<>();
    List<Integer> bad = new ArrayList<>();
    boolean torn = false;
    String[] lines = text.split("\n", -1);
    boolean endsWithNewline = text.isEmpty() || text.endsWith("\n");
    for (int i = 0; i < lines.length; i++) {
      String line = lines[i];
      boolean last = i == lines.length - 1;
      if (line.isBlank()) {
        continue;
      }
      try {
        records.add(JSON.readValue(line, MAP));
        if (last && !endsWithNewline) {
          torn = true; // complete JSON but no newline: the write stopped just short
          records.remove(records.size() - 1);
        }
      } catch (JacksonException e) {
        if (last && !endsWithNewline) {
          torn = true;
        } else {
          bad.add(i + 1);
        }
      }
    }
    return new Contents(records, torn, bad);
  }
}
