package dev.stepwarden.report;

import static dev.stepwarden.report.RunReport.fmt;

import dev.stepwarden.report.RunReport.Event;
import dev.stepwarden.report.RunReport.Intervention;
import java.time.Duration;
import java.time.Instant;
import java.time.ZoneOffset;
import java.time.format.DateTimeFormatter;
import java.util.ArrayList;
import java.util.Comparator;
import java.util.List;
import java.util.Locale;

/** The terminal form of a {@link RunReport}: the night in time order, then what to use. */
final class TextReport {
  static final DateTimeFormatter TIME = DateTimeFormatter.ofPattern("HH:mm:ss")
      .withZone(ZoneOffset.UTC);
  static final DateTimeFormatter DATE_TIME = DateTimeFormatter.ofPattern("yyyy-MM-dd HH:mm:ss")
      .withZone(ZoneOffset.UTC);

  private TextReport() {}

  static String render(RunReport r) {
    StringBuilder b = new StringBuilder();
    b.append("stepwarden report: ").append(r.name()).append("  (").append(r.dir()).append(")\n");
    b.append("  when      ").append(when(r)).append('\n');
    b.append("  outcome   ").append(r.outcome().replace('-', ' '))
        .append(r.exitCode().map(c -> " (exit " + c + ")").orElse("")).append(": ")
        .append(r.reason()).append('\n');
    b.append("  use       ").append(best(r)).append('\n');
    b.append("  rate      ").append(fmt(r.startRate())).append(" at the start -> ")
        .append(fmt(r.finalRate())).append(" at the end; ").append(r.interventions().size())
        .append(r.interventions().size() == 1 ? " intervention" : " interventions").append('\n');
    b.append('\n').append("The night in order (UTC):\n");
    for (Line l : story(r)) {
      b.append("  ").append(l.at == null ? "   ?    " : TIME.format(l.at)).append("  ")
          .append(l.text.replace("\n", "\n            ")).append('\n');
    }
    b.append('\n').append(counts(r)).append('\n');
    b.append(auditState(r)).append('\n');
    return b.toString();
  }

  static String when(RunReport r) {
    if (r.startedAt().isEmpty()) {
      return "no dated record";
    }
    return DATE_TIME.format(r.startedAt().get()) + " to "
        + r.endedAt().map(DATE_TIME::format).orElse("?") + " UTC (" + duration(r.duration())
        + "); " + r.samples() + " samples"
        + (r.samples() > 0 ? " up to step " + r.history().maxStep() : "");
  }

  static String best(RunReport r) {
    if (Double.isNaN(r.bestValidation())) {
      return "no validation value was reported"
          + r.bestCheckpoint().map(c -> "; last checkpoint " + c).orElse("");
    }
    return "best validation " + fmt(r.bestValidation()) + " at step " + r.bestValidationStep()
        + r.bestCheckpoint().map(c -> "; checkpoint " + c)
            .orElse("; no checkpoint holds it (none was recorded)");
  }

  static String counts(RunReport r) {
    long confirmed = r.interventions().stream().filter(Intervention::confirmed).count();
    String lines = r.lines().map(n -> n + " lines read, " + r.metricLines().orElse(0L)
        + " with metrics, " + r.ignoredLines().orElse(0L) + " ignored")
        .orElse("line counts were not recorded (the run-end record lacks them)");
    return "Counts: " + lines + "; " + confirmed + " rate changes confirmed by the trainer, "
        + r.unconfirmed() + " not confirmed.";
  }

  static String auditState(RunReport r) {
    StringBuilder b = new StringBuilder("Audit log: ").append(r.auditRecords()).append(" records");
    if (!r.tornLastAuditLine() && r.badAuditLines().isEmpty()) {
      b.append(", intact.");
    } else {
      b.append('.');
    }
    if (r.tornLastAuditLine()) {
      b.append("\nWARNING: the last line of the audit log is torn (the supervisor stopped in the"
          + " middle of writing it); it was left out, everything before it is complete.");
    }
    if (!r.badAuditLines().isEmpty()) {
      b.append("\nWARNING: audit lines ").append(r.badAuditLines())
          .append(" do not parse (the file was edited or damaged); they were skipped.");
    }
    if (r.history().badLines() > 0) {
      b.append("\nNote: ").append(r.history().badLines())
          .append(" lines of metrics.jsonl did not parse and were skipped.");
    }
    return b.toString();
  }

  record Line(long seq, Instant at, String text) {}

  static List<Line> story(RunReport r) {
    List<Line> out = new ArrayList<>();
    for (Event e : r.events()) {
      out.add(new Line(e.seq(), e.at(), e.text()));
    }
    for (Intervention iv : r.interventions()) {
      out.add(new Line(iv.seq(), iv.at(), intervention(iv)));
    }
    out.sort(Comparator.comparingLong(Line::seq));
    return out;
  }

  static String intervention(Intervention iv) {
    StringBuilder b = new StringBuilder();
    b.append('#').append(iv.number()).append(" step ").append(iv.step()).append(": guard '")
        .append(iv.guard()).append("' fired: ").append(iv.evidence());
    b.append('\n').append("   -> ").append(action(iv));
    if (!iv.result().isEmpty()) {
      b.append("; ").append(iv.result());
    }
    if (!iv.confirmation().isEmpty()) {
      b.append("; ").append(iv.confirmation());
    }
    if (!iv.note().isEmpty()) {
      b.append(" (").append(iv.note()).append(')');
    }
    return b.toString();
  }

  /** What the decision did, in words. */
  static String action(Intervention iv) {
    List<String> parts = new ArrayList<>();
    if (iv.rewinds()) {
      parts.add(iv.resumeStep() != null ? "rewound to the checkpoint of step " + iv.resumeStep()
          : "rewound");
    }
    if (iv.changesRate()) {
      parts.add((iv.rateAfter() < iv.rateBefore() ? "lowered" : "raised") + " the rate "
          + fmt(iv.rateBefore()) + " -> " + fmt(iv.rateAfter()));
    } else if (!"continue".equals(iv.ending())) {
      parts.add(iv.ending().equals("stop_early") ? "stopped the run early at rate "
          + fmt(iv.rateBefore()) : "gave up at rate " + fmt(iv.rateBefore()));
    } else {
      parts.add("rate unchanged at " + fmt(iv.rateBefore()));
    }
    if (iv.changesRate() && !"continue".equals(iv.ending())) {
      parts.add(iv.ending().equals("stop_early") ? "stopped early" : "gave up");
    }
    return String.join(", ", parts);
  }

  static String duration(Duration d) {
    long s = d.toSeconds();
    if (s < 120) {
      return s + " s";
    }
    if (s < 7200) {
      return String.format(Locale.ROOT, "%d min %02d s", s / 60, s % 60);
    }
    return String.format(Locale.ROOT, "%d h %02d min", s / 3600, (s % 3600) / 60);
  }
}
