package dev.stepwarden.replay;

import dev.stepwarden.engine.Decision;
import java.time.Instant;
import java.time.ZoneOffset;
import java.time.format.DateTimeFormatter;
import java.util.ArrayList;
import java.util.LinkedHashMap;
import java.util.List;
import java.util.Locale;
import java.util.Map;

/** The text and JSON forms of a {@link Replay.Result}. */
public final class ReplayText {
  private static final DateTimeFormatter TIME = DateTimeFormatter.ofPattern(
      "yyyy-MM-dd HH:mm:ss").withZone(ZoneOffset.UTC);

  private ReplayText() {}

  /** The plain-words report of a replay of {@code file} with the guard file {@code rules}. */
  public static String text(Replay.Result r, String file, String rules, int guards) {
    StringBuilder b = new StringBuilder();
    b.append("replay: ").append(guards).append(guards == 1 ? " guard" : " guards").append(" of ")
        .append(rules).append(" over ").append(file).append(" (").append(inputWords(r.input()))
        .append(")\n");
    if (r.fired().isEmpty()) {
      b.append("  no guard would have fired.\n");
    }
    boolean said = false;
    for (Replay.Fired f : r.fired()) {
      Decision d = f.decision();
      if (f.hypothetical() && !said) {
        said = true;
        b.append("  -- from step ").append(r.departedAtStep()).append(" on, the recorded curve no"
            + " longer shows what would have happened (").append(r.departure())
            .append("); the decisions below are hypothetical --\n");
      }
      b.append("  step ").append(d.step());
      if (r.input() == Replay.Input.NORMALIZED && d.wallMillis() > 0) {
        b.append(" (").append(TIME.format(Instant.ofEpochMilli(d.wallMillis()))).append(" UTC)");
      }
      b.append(": guard '").append(d.guard()).append("' would fire");
      if (f.hypothetical()) {
        b.append(" [hypothetical]");
      }
      b.append(": ").append(d.evidence().summary()).append("\n      -> ").append(action(d))
          .append('\n');
    }
    if (!said && r.departedAtStep() >= 0) {
      b.append("  -- from step ").append(r.departedAtStep()).append(" on, the recorded curve no"
          + " longer shows what would have happened (").append(r.departure()).append(") --\n");
    }
    if (r.departedAtStep() < 0 && r.input() == Replay.Input.NORMALIZED && !r.fired().isEmpty()) {
      b.append("  The recorded rate matched the replay's at every sample: the recorded run took"
          + " this very course, so none of these decisions is hypothetical.\n");
    }
    if (r.endedAtStep() >= 0) {
      b.append("  The run would have ended at step ").append(r.endedAtStep())
          .append(r.unreadLines() > 0 ? "; the " + r.unreadLines() + " lines after it were not"
              + " replayed" : "").append(".\n");
    }
    b.append(String.format(Locale.ROOT, "%d lines, %d samples, %d ignored lines; %d decisions;"
        + " %.0f samples/s%n", r.lines(), r.samples(), r.ignoredLines(), r.fired().size(),
        r.samplesPerSecond()));
    if (r.ambiguousValues() > 0) {
      b.append(r.ambiguousValues()).append(" values were passed over because they read two ways"
          + " (such as 1,234.5: a thousands separator or a list?); print numbers without"
          + " separators.\n");
    }
    return b.toString();
  }

  static String action(Decision d) {
    List<String> parts = new ArrayList<>();
    if (d.rewinds()) {
      parts.add("rewind" + (d.skipBatches() > 0 ? ", skipping " + d.skipBatches() + " batches"
          : ""));
    }
    if (d.changesRate()) {
      parts.add((d.rateAfter() < d.rateBefore() ? "lower" : "raise") + " the rate "
          + d.rateBefore() + " -> " + d.rateAfter());
    }
    if (d.ending() == Decision.Ending.STOP_EARLY) {
      parts.add("stop early (exit 3)");
    } else if (d.ending() == Decision.Ending.GIVE_UP) {
      parts.add("give up (exit 4)");
    }
    if (parts.isEmpty()) {
      parts.add("no change (rate stays " + d.rateBefore() + ")");
    }
    return String.join(", ", parts) + (d.note().isEmpty() ? "" : " (" + d.note() + ")");
  }

  private static String inputWords(Replay.Input in) {
    return switch (in) {
      case NORMALIZED -> "a run directory's normalized metrics";
      case RAW -> "a trainer log, read through the guard file's read plan";
      case CSV -> "CSV with a header row";
      case EVENTS -> "an event file (TFRecord), its scalar tags as keys";
    };
  }

  /** The same facts for scripts. */
  public static Map<String, Object> toMap(Replay.Result r, String file, String rules) {
    Map<String, Object> m = new LinkedHashMap<>();
    m.put("file", file);
    m.put("rules", rules);
    m.put("input", r.input().name().toLowerCase(Locale.ROOT));
    m.put("lines", r.lines());
    m.put("samples", r.samples());
    m.put("ignored_lines", r.ignoredLines());
    m.put("ambiguous_values", r.ambiguousValues());
    m.put("departed_at_step", r.departedAtStep() < 0 ? null : r.departedAtStep());
    m.put("departure", r.departure().isEmpty() ? null : r.departure());
    m.put("ended_at_step", r.endedAtStep() < 0 ? null : r.endedAtStep());
    m.put("unread_lines", r.unreadLines());
    List<Map<String, Object>> fired = new ArrayList<>();
    for (Replay.Fired f : r.fired()) {
      Decision d = f.decision();
      Map<String, Object> x = new LinkedHashMap<>();
      x.put("step", d.step());
      x.put("at", r.input() == Replay.Input.NORMALIZED && d.wallMillis() > 0
          ? Instant.ofEpochMilli(d.wallMillis()).toString() : null);
      x.put("guard", d.guard());
      x.put("detector", d.evidence().detector());
      x.put("evidence", d.evidence().summary());
      x.put("figures", d.evidence().figures());
      x.put("rate_before", d.rateBefore());
      x.put("rate_after", d.rateAfter());
      x.put("rewind", d.rewinds());
      x.put("ending", d.ending().name().toLowerCase(Locale.ROOT));
      x.put("action", action(d));
      x.put("hypothetical", f.hypothetical());
      x.put("recorded_rate", Double.isNaN(f.recordedRate()) ? null : f.recordedRate());
      fired.add(x);
    }
    m.put("decisions", fired);
    m.put("samples_per_second", Double.isNaN(r.samplesPerSecond()) ? null
        : Math.round(r.samplesPerSecond()));
    return m;
  }
}
