package dev.stepwarden.queue;

import java.nio.file.Path;
import java.time.Instant;
import java.util.LinkedHashMap;
import java.util.Map;
import tools.jackson.databind.JsonNode;

/**
 * What {@code queue add} asks for.
 *
 * @param rules the guard file (copied into the queue with the overrides applied)
 * @param at start at this time (null: as soon as a slot is free); exclusive with cron
 * @param cron a Quartz cron expression (seconds first), a new run at each firing
 * @param priority 0 to 99: a waiting job of a higher priority starts first
 * @param after the id of a job this one waits for (it starts once that one ended)
 * @param overrides {@code key.path=value} changes to the guard file
 * @param cohort the cohort whose completed runs the median stopping rule compares, or null
 * @param workdir where the trainer runs when the guard file names no workdir
 */
public record JobRequest(Path rules, Instant at, String cron, int priority, String after,
    Map<String, String> overrides, String cohort, Path workdir) {
  public JobRequest {
    overrides = overrides == null ? Map.of() : new LinkedHashMap<>(overrides);
    rules = rules.toAbsolutePath();
    workdir = workdir == null ? Path.of("").toAbsolutePath() : workdir.toAbsolutePath();
    if (at != null && cron != null) {
      throw new IllegalArgumentException("give --at or --cron, not both");
    }
  }

  public static JobRequest now(Path rules) {
    return new JobRequest(rules, null, null, 5, null, null, null, null);
  }

  /** The request as a serve receives it from a command (absolute paths: same user, same host). */
  Map<String, Object> toJson() {
    Map<String, Object> m = new LinkedHashMap<>();
    m.put("rules", rules.toString());
    m.put("at", at == null ? null : at.toString());
    m.put("cron", cron);
    m.put("priority", priority);
    m.put("after", after);
    m.put("overrides", overrides);
    m.put("cohort", cohort);
    m.put("workdir", workdir.toString());
    return m;
  }

  static JobRequest fromJson(JsonNode n) {
    Map<String, String> sets = new LinkedHashMap<>();
    n.path("overrides").properties().forEach(e -> sets.put(e.getKey(), e.getValue().asString()));
    return new JobRequest(Path.of(n.get("rules").asString()), text(n, "at") == null ? null
        : Instant.parse(text(n, "at")), text(n, "cron"), n.path("priority").asInt(5),
        text(n, "after"), sets, text(n, "cohort"), Path.of(n.get("workdir").asString()));
  }

  private static String text(JsonNode n, String key) {
    JsonNode v = n.get(key);
    return v == null || v.isNull() ? null : v.asString();
  }
}
