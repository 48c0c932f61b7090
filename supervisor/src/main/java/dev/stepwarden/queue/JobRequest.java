package dev.stepwarden.queue;

import java.nio.file.Path;
import java.time.Instant;
import java.util.LinkedHashMap;
import java.util.Map;

/**
 * What {@code queue add} asks for.
 *
 * @param rules the guard file (copied into the queue with the overrides applied)
 * @param at start at this time (null: as soon as a slot is free); exclusive with cron
 * @param cron a Quartz cron expression (seconds first), a new run at each firing
 * @param priority among jobs due at the same time the higher starts first
 * @param after the id of a job this one waits for (it starts once that one ended)
 * @param overrides {@code key.path=value} changes to the guard file
 * @param study the study name for the median stopping rule, or null
 * @param workdir where the trainer runs when the guard file names no workdir
 */
public record JobRequest(Path rules, Instant at, String cron, int priority, String after,
    Map<String, String> overrides, String study, Path workdir) {
  public JobRequest {
    overrides = overrides == null ? Map.of() : new LinkedHashMap<>(overrides);
    workdir = workdir == null ? Path.of("").toAbsolutePath() : workdir.toAbsolutePath();
    if (at != null && cron != null) {
      throw new IllegalArgumentException("give --at or --cron, not both");
    }
  }

  public static JobRequest now(Path rules) {
    return new JobRequest(rules, null, null, 5, null, null, null, null);
  }
}
