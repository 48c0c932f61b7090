package dev.stepwarden.report;

import dev.stepwarden.audit.AuditReader;
import dev.stepwarden.supervise.RunDirectory;
import java.io.IOException;
import java.nio.file.Files;
import java.nio.file.Path;
import java.time.Duration;
import java.time.Instant;
import java.time.format.DateTimeParseException;
import java.util.ArrayList;
import java.util.HashMap;
import java.util.LinkedHashMap;
import java.util.List;
import java.util.Locale;
import java.util.Map;
import java.util.Optional;

/**
 * The morning report of one run directory: what happened overnight, why, and which checkpoint
 * to use.
 *
 * <p>Design: everything comes from two files the supervisor wrote, never from the supervisor's
 * memory: the audit log (the night in time order, with each decision's evidence) and the
 * normalized metrics (the curves, read once and decimated; see {@link MetricsHistory}). A run
 * whose supervisor died still reports: a torn last audit line is left out and said so, and a
 * missing {@code run-end} record makes the outcome "unfinished". The same data feeds the terminal
 * text, the JSON and the HTML page ({@link #text()}, {@link #toMap()}, {@link #html()}), so the
 * three never disagree.
 */
public final class RunReport {
  /** One guard decision with what became of it. */
  public record Intervention(int number, long seq, long step, Instant at, String guard,
      String detector, String evidence, Map<String, Object> figures, List<String> actions,
      double rateBefore, double rateAfter, String ending, String note, String result,
      String confirmation, boolean confirmed, boolean unconfirmed, Long resumeStep,
      String resumeFrom) {
    public Intervention {
      figures = figures == null ? Map.of() : Map.copyOf(figures);
      actions = actions == null ? List.of() : List.copyOf(actions);
    }

    public boolean changesRate() {
      return Double.compare(rateBefore, rateAfter) != 0;
    }

    public boolean rewinds() {
      return actions.stream().anyMatch(a -> a.startsWith("rewind")) && "continue".equals(ending);
    }
  }

  /** Anything else worth a line in the night's story (launches, crashes, silences, warnings). */
  public record Event(long seq, Instant at, String type, String text) {}

  private final Path dir;
  private final String name;
  private final Instant startedAt;
  private final Instant endedAt;
  private final String outcome;
  private final Integer exitCode;
  private final String reason;
  private final double startRate;
  private final double finalRate;
  private final List<Intervention> interventions;
  private final List<Event> events;
  private final double bestValidation;
  private final long bestValidationStep;
  private final String bestCheckpoint;
  private final Long lines;
  private final Long metricLines;
  private final Long ignoredLines;
  private final int unconfirmed;
  private final int records;
  private final boolean tornLastLine;
  private final List<Integer> badAuditLines;
  private final MetricsHistory history;

  private RunReport(Builder b) {
    dir = b.dir;
    name = b.name;
    startedAt = b.startedAt;
    endedAt = b.endedAt;
    outcome = b.outcome;
    exitCode = b.exitCode;
    reason = b.reason;
    startRate = b.startRate;
    finalRate = b.finalRate;
    interventions = List.copyOf(b.interventions);
    events = List.copyOf(b.events);
    bestValidation = b.bestValidation;
    bestValidationStep = b.bestValidationStep;
    bestCheckpoint = b.bestCheckpoint;
    lines = b.lines;
    metricLines = b.metricLines;
    ignoredLines = b.ignoredLines;
    unconfirmed = b.unconfirmed;
    records = b.records;
    tornLastLine = b.torn;
    badAuditLines = List.copyOf(b.badLines);
    history = b.history;
  }

  private RunReport(RunReport o, MetricsHistory h) {
    dir = o.dir;
    name = o.name;
    startedAt = o.startedAt;
    endedAt = o.endedAt;
    outcome = o.outcome;
    exitCode = o.exitCode;
    reason = o.reason;
    startRate = o.startRate;
    finalRate = o.finalRate;
    interventions = o.interventions;
    events = o.events;
    bestValidation = o.bestValidation;
    bestValidationStep = o.bestValidationStep;
    bestCheckpoint = o.bestCheckpoint;
    lines = o.lines;
    metricLines = o.metricLines;
    ignoredLines = o.ignoredLines;
    unconfirmed = o.unconfirmed;
    records = o.records;
    tornLastLine = o.tornLastLine;
    badAuditLines = o.badAuditLines;
    history = h;
  }

  /** The same facts drawn over another history (lets the drawing be tried on huge curves). */
  RunReport withHistory(MetricsHistory h) {
    return new RunReport(this, h);
  }

  /** True when {@code dir} holds an audit log, i.e. is a run directory. */
  public static boolean isRunDirectory(Path dir) {
    return Files.isRegularFile(dir.resolve(RunDirectory.AUDIT));
  }

  /** Reads the report of the run directory {@code dir}. */
  public static RunReport load(Path dir) throws IOException {
    return load(dir, MetricsHistory.DEFAULT_TARGET);
  }

  static RunReport load(Path dir, int target) throws IOException {
    Path audit = dir.resolve(RunDirectory.AUDIT);
    if (!Files.isRegularFile(audit)) {
      throw new IOException(dir + " is not a run directory: it has no " + RunDirectory.AUDIT
          + " (give a folder made by 'stepwarden run' or 'stepwarden demo')");
    }
    AuditReader.Contents c = AuditReader.read(audit);
    Builder b = new Builder();
    b.dir = dir.toAbsolutePath().normalize();
    b.torn = c.tornLastLine();
    b.badLines = c.badLines();
    b.records = c.records().size();
    b.history = MetricsHistory.read(dir.resolve(RunDirectory.METRICS), target);
    for (Map<String, Object> r : c.records()) {
      b.take(r);
    }
    b.finish();
    return new RunReport(b);
  }

  public Path dir() {
    return dir;
  }

  public String name() {
    return name;
  }

  public Optional<Instant> startedAt() {
    return Optional.ofNullable(startedAt);
  }

  public Optional<Instant> endedAt() {
    return Optional.ofNullable(endedAt);
  }

  /** Wall time from the first to the last record, or zero when unknown. */
  public Duration duration() {
    return startedAt == null || endedAt == null ? Duration.ZERO
        : Duration.between(startedAt, endedAt);
  }

  /** finished, stopped-early, gave-up, interrupted, internal-error, or unfinished. */
  public String outcome() {
    return outcome;
  }

  public Optional<Integer> exitCode() {
    return Optional.ofNullable(exitCode);
  }

  public String reason() {
    return reason;
  }

  public double startRate() {
    return startRate;
  }

  public double finalRate() {
    return finalRate;
  }

  public List<Intervention> interventions() {
    return interventions;
  }

  public List<Event> events() {
    return events;
  }

  /** The best validation value, NaN when the run never reported one. */
  public double bestValidation() {
    return bestValidation;
  }

  public long bestValidationStep() {
    return bestValidationStep;
  }

  public Optional<String> bestCheckpoint() {
    return Optional.ofNullable(bestCheckpoint);
  }

  /** Lines read, metric lines and ignored lines, when the run ended with a run-end record. */
  public Optional<Long> lines() {
    return Optional.ofNullable(lines);
  }

  public Optional<Long> metricLines() {
    return Optional.ofNullable(metricLines);
  }

  public Optional<Long> ignoredLines() {
    return Optional.ofNullable(ignoredLines);
  }

  /** Rate changes the trainer did not confirm in time. */
  public int unconfirmed() {
    return unconfirmed;
  }

  public int auditRecords() {
    return records;
  }

  public boolean tornLastAuditLine() {
    return tornLastLine;
  }

  public List<Integer> badAuditLines() {
    return badAuditLines;
  }

  public long samples() {
    return history.samples();
  }

  MetricsHistory history() {
    return history;
  }

  /** The terminal text. */
  public String text() {
    return TextReport.render(this);
  }

  /** The same data for scripts (JSON-ready maps, lists, strings and numbers). */
  public Map<String, Object> toMap() {
    return JsonReport.of(this);
  }

  /** One self-contained HTML page with the charts and the table of interventions. */
  public String html() {
    return HtmlPage.render(this);
  }

  private static final String NO_END = "the audit log has no run-end record: the supervisor is"
      + " still running or died (continue it with 'stepwarden run --resume')";

  private static final class Builder {
    Path dir;
    String name = "(unnamed run)";
    Instant startedAt;
    Instant endedAt;
    String outcome = "unfinished";
    Integer exitCode;
    String reason = NO_END;
    double startRate = Double.NaN;
    double finalRate = Double.NaN;
    final List<Intervention> interventions = new ArrayList<>();
    final List<Event> events = new ArrayList<>();
    final Map<Long, Integer> bySeq = new HashMap<>();
    double bestValidation = Double.NaN;
    long bestValidationStep = -1;
    String bestCheckpoint;
    final Map<String, Long> checkpointSteps = new LinkedHashMap<>();
    Long lines;
    Long metricLines;
    Long ignoredLines;
    int unconfirmed;
    int records;
    boolean torn;
    List<Integer> badLines = List.of();
    MetricsHistory history;
    boolean ended;

    void take(Map<String, Object> r) {
      String type = str(r.get("type"));
      long seq = num(r.get("seq"), -1);
      Instant at = instant(r.get("at"));
      if (at != null) {
        if (startedAt == null) {
          startedAt = at;
        }
        endedAt = at;
      }
      if (type == null) {
        return;
      }
      switch (type) {
        case "run-start" -> {
          name = Optional.ofNullable(str(r.get("name"))).orElse(name);
          startRate = dbl(r.get("learning_rate"));
          finalRate = startRate;
        }
        case "launch" -> {
          String why = str(r.get("reason"));
          if (!"start".equals(why)) {
            String from = str(r.get("resume_from"));
            long skip = num(r.get("skip_batches"), 0);
            events.add(new Event(seq, at, type, "launch " + num(r.get("attempt"), 0) + " ("
                + why + ") at rate " + fmt(dbl(r.get("learning_rate")))
                + (from == null || from.isEmpty() ? ", from scratch" : ", resuming from " + from)
                + (skip > 0 ? ", skipping " + skip + " batches" : "")));
          } else {
            events.add(new Event(seq, at, type, "trainer started at rate "
                + fmt(dbl(r.get("learning_rate")))));
          }
        }
        case "decision" -> {
          int n = interventions.size() + 1;
          @SuppressWarnings("unchecked")
          Map<String, Object> figures = r.get("figures") instanceof Map<?, ?> m
              ? (Map<String, Object>) m : Map.of();
          List<String> actions = new ArrayList<>();
          if (r.get("action") instanceof List<?> l) {
            l.forEach(a -> actions.add(String.valueOf(a)));
          }
          Intervention iv = new Intervention(n, seq, num(r.get("step"), -1), at,
              str(r.get("guard")), str(r.get("detector")), str(r.get("evidence")),
              sanitize(figures), actions, dbl(r.get("rate_before")), dbl(r.get("rate_after")),
              Optional.ofNullable(str(r.get("ending"))).orElse("continue"),
              Optional.ofNullable(str(r.get("note"))).orElse(""), "", "", false, false, null,
              null);
          bySeq.put(seq, interventions.size());
          interventions.add(iv);
          if (!Double.isNaN(iv.rateAfter())) {
            finalRate = iv.rateAfter();
          }
        }
        case "outcome" -> {
          Integer i = linked(r);
          String why = str(r.get("reason"));
          if (i == null && !interventions.isEmpty() && r.get("decision_seq") == null) {
            // A rewind's, a restart's or an ending's outcome follows its own decision.
            Intervention last = interventions.get(interventions.size() - 1);
            boolean own = why == null ? !"continue".equals(last.ending())
                : why.equals("rewind") || why.equals("new rate by restart");
            i = own ? interventions.size() - 1 : null;
          }
          if (i == null) {
            events.add(new Event(seq, at, type, (why == null ? "" : why + ": ")
                + str(r.get("result"))));
          } else {
            Intervention iv = interventions.get(i);
            String result = str(r.get("result"));
            Long resumeStep = r.get("resume_step") instanceof Number s ? s.longValue()
                : iv.resumeStep();
            String resumeFrom = r.get("resume_from") != null ? str(r.get("resume_from"))
                : iv.resumeFrom();
            interventions.set(i, with(iv, join(iv.result(), result), iv.confirmation(),
                iv.confirmed(), iv.unconfirmed(), resumeStep, resumeFrom));
          }
        }
        case "confirmed" -> {
          Integer i = linked(r);
          if (i != null) {
            Intervention iv = interventions.get(i);
            interventions.set(i, with(iv, iv.result(), "confirmed after "
                + num(r.get("after_ms"), 0) + " ms (by " + str(r.get("by")) + ")", true, false,
                iv.resumeStep(), iv.resumeFrom()));
          }
        }
        case "not-confirmed" -> {
          unconfirmed++;
          Integer i = linked(r);
          String text = "NOT confirmed within " + num(r.get("waited_ms"), 0) + " ms; fallback: "
              + str(r.get("fallback"));
          if (i != null) {
            Intervention iv = interventions.get(i);
            interventions.set(i, with(iv, iv.result(), text, false, true, iv.resumeStep(),
                iv.resumeFrom()));
          }
          events.add(new Event(seq, at, type, "the trainer did not confirm rate "
              + fmt(dbl(r.get("learning_rate"))) + " (" + text + ")"));
        }
        case "checkpoint" -> {
          String path = str(r.get("path"));
          if (path != null) {
            checkpointSteps.put(path, num(r.get("step"), -1));
          }
        }
        case "crash" -> events.add(new Event(seq, at, type, "the trainer crashed with exit code "
            + num(r.get("exit_code"), -1) + " at step " + num(r.get("step"), -1)
            + (r.get("out_of_memory") != null ? " (out of memory: " + str(r.get("out_of_memory"))
                + ")" : r.get("note") != null ? " (" + str(r.get("note")) + ")" : "")));
        case "silence" -> events.add(new Event(seq, at, type,
            (Boolean.TRUE.equals(r.get("before_first_metric"))
                ? "no first metric since the launch for " : "no metric for ")
            + num(r.get("quiet_ms"), 0) / 1000 + " s (limit " + num(r.get("limit_ms"), 0) / 1000
            + " s) at step " + num(r.get("step"), -1) + ": treated as hung"));
        case "warning" -> events.add(new Event(seq, at, type, "warning: "
            + str(r.get("message"))));
        case "hangup" -> events.add(new Event(seq, at, type, "SIGHUP (the terminal went away) at"
            + " step " + num(r.get("step"), -1) + ": ignored, the run went on"));
        case "interrupted" -> events.add(new Event(seq, at, type, "interrupted by "
            + str(r.get("signal")) + " at step " + num(r.get("step"), -1)));
        case "trainer-exit" -> events.add(new Event(seq, at, type, "the trainer exited with code "
            + num(r.get("exit_code"), 0) + " at step " + num(r.get("step"), -1)));
        case "run-resume" -> {
          // the run goes on after an interruption: unfinished until a later run-end
          ended = false;
          outcome = "unfinished";
          exitCode = null;
          reason = NO_END;
          events.add(new Event(seq, at, type, "resumed: " + str(r.get("result"))));
        }
        case "run-suspended" -> events.add(new Event(seq, at, type, "suspended (pre-empted): "
            + str(r.get("reason"))));
        case "run-end" -> {
          ended = true;
          outcome = Optional.ofNullable(str(r.get("outcome"))).orElse("unknown");
          exitCode = r.get("exit_code") instanceof Number n ? n.intValue() : null;
          reason = Optional.ofNullable(str(r.get("reason"))).orElse("");
          if (r.get("final_learning_rate") instanceof Number n) {
            finalRate = n.doubleValue();
          }
          if (r.get("best_validation") instanceof Number n) {
            bestValidation = n.doubleValue();
            bestValidationStep = num(r.get("best_validation_step"), -1);
          }
          bestCheckpoint = str(r.get("best_checkpoint"));
          lines = r.get("lines") instanceof Number n ? n.longValue() : null;
          metricLines = r.get("metric_lines") instanceof Number n ? n.longValue() : null;
          ignoredLines = r.get("ignored_lines") instanceof Number n ? n.longValue() : null;
        }
        default -> { }
      }
    }

    void finish() {
      if (Double.isNaN(bestValidation) && !Double.isNaN(history.bestValidation())) {
        bestValidation = history.bestValidation();
        bestValidationStep = history.bestValidationStep();
      }
      if (bestCheckpoint == null && bestValidationStep >= 0 && !checkpointSteps.isEmpty()) {
        // Without a run-end record: the last checkpoint written at or before the best step.
        String pick = null;
        long pickStep = -1;
        for (Map.Entry<String, Long> e : checkpointSteps.entrySet()) {
          if (e.getValue() <= bestValidationStep && e.getValue() >= pickStep) {
            pick = e.getKey();
            pickStep = e.getValue();
          }
        }
        bestCheckpoint = pick;
      }
      if (!ended && history.lastMillis() > 0 && endedAt != null
          && history.lastMillis() > endedAt.toEpochMilli()) {
        endedAt = Instant.ofEpochMilli(history.lastMillis());
      }
    }

    private Integer linked(Map<String, Object> r) {
      Object ds = r.get("decision_seq");
      return ds instanceof Number n ? bySeq.get(n.longValue()) : null;
    }

    private static Intervention with(Intervention iv, String result, String confirmation,
        boolean confirmed, boolean unconfirmed, Long resumeStep, String resumeFrom) {
      return new Intervention(iv.number(), iv.seq(), iv.step(), iv.at(), iv.guard(),
          iv.detector(), iv.evidence(), iv.figures(), iv.actions(), iv.rateBefore(),
          iv.rateAfter(), iv.ending(), iv.note(), result, confirmation, confirmed, unconfirmed,
          resumeStep, resumeFrom);
    }

    private static String join(String a, String b) {
      if (b == null || b.isEmpty()) {
        return a;
      }
      return a == null || a.isEmpty() ? b : a + "; " + b;
    }

    private static Map<String, Object> sanitize(Map<String, Object> m) {
      Map<String, Object> out = new LinkedHashMap<>();
      m.forEach((k, v) -> out.put(k, v == null ? "null" : v));
      return out;
    }
  }

  static String str(Object o) {
    return o == null ? null : String.valueOf(o);
  }

  static long num(Object o, long fallback) {
    return o instanceof Number n ? n.longValue() : fallback;
  }

  static double dbl(Object o) {
    if (o instanceof Number n) {
      return n.doubleValue();
    }
    if (o instanceof String s) {
      try {
        return Double.parseDouble(s);
      } catch (NumberFormatException e) {
        return Double.NaN;
      }
    }
    return Double.NaN;
  }

  static Instant instant(Object o) {
    if (!(o instanceof String s)) {
      return null;
    }
    try {
      return Instant.parse(s);
    } catch (DateTimeParseException e) {
      return null;
    }
  }

  /** A rate or loss for people: up to 4 significant digits, no trailing noise. */
  static String fmt(double v) {
    if (Double.isNaN(v)) {
      return "n/a";
    }
    if (Double.isInfinite(v)) {
      return v > 0 ? "inf" : "-inf";
    }
    if (v == 0) {
      return "0";
    }
    double a = Math.abs(v);
    String s = a >= 1e-3 && a < 1e5 ? String.format(Locale.ROOT, "%.4g", v)
        : String.format(Locale.ROOT, "%.3e", v);
    if (s.contains("e")) {
      String[] parts = s.split("e");
      return trimZeros(parts[0]) + "e" + Integer.parseInt(parts[1]);
    }
    return trimZeros(s);
  }

  private static String trimZeros(String s) {
    if (!s.contains(".")) {
      return s;
    }
    s = s.replaceAll("0+$", "");
    return s.endsWith(".") ? s.substring(0, s.length() - 1) : s;
  }
}
