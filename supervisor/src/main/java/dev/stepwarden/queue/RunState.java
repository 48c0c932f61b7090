package dev.stepwarden.queue;

import dev.stepwarden.audit.AuditReader;
import dev.stepwarden.supervise.RunDirectory;
import java.io.IOException;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.Map;

/**
 * What a run directory says about its run: the source of truth when a job is fired again after a
 * crash, which makes re-running a job idempotent (a run that ended is never started twice).
 */
record RunState(Kind kind, String outcome, int exitCode, String reason) {
  /** A marker the median rule leaves in a run directory it stopped. */
  static final String MEDIAN_STOP = "median-stop.json";

  enum Kind {
    /** No run was started in this directory yet. */
    EMPTY,
    /** A run started and did not end (its supervisor died), or it was interrupted. */
    UNFINISHED,
    /** The run ended; outcome and exit code are recorded. */
    ENDED
  }

  static RunState of(Path dir) throws IOException {
    Path audit = dir.resolve(RunDirectory.AUDIT);
    if (!Files.exists(audit)) {
      return new RunState(Kind.EMPTY, null, -1, null);
    }
    Map<String, Object> end = null;
    boolean started = false;
    for (Map<String, Object> r : AuditReader.read(audit).records()) {
      if ("run-start".equals(r.get("type"))) {
        started = true;
      } else if ("run-end".equals(r.get("type"))) {
        end = r;
      }
    }
    if (end != null && Files.exists(dir.resolve(MEDIAN_STOP))) {
      return new RunState(Kind.ENDED, "median-stopped", 3, String.valueOf(end.get("reason")));
    }
    if (end == null || "interrupted".equals(end.get("outcome"))) {
      return new RunState(started || end != null ? Kind.UNFINISHED : Kind.EMPTY, null, -1, null);
    }
    Object code = end.get("exit_code");
    return new RunState(Kind.ENDED, String.valueOf(end.get("outcome")),
        code instanceof Number n ? n.intValue() : -1, String.valueOf(end.get("reason")));
  }
}
