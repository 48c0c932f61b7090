package dev.stepwarden.report;

import dev.stepwarden.report.RunReport.Event;
import dev.stepwarden.report.RunReport.Intervention;
import java.util.ArrayList;
import java.util.LinkedHashMap;
import java.util.List;
import java.util.Map;

/** The script form of a {@link RunReport}: the same facts as the text, as plain maps. */
final class JsonReport {
  private JsonReport() {}

  static Map<String, Object> of(RunReport r) {
    Map<String, Object> m = new LinkedHashMap<>();
    m.put("run_dir", r.dir().toString());
    m.put("name", r.name());
    m.put("started_at", r.startedAt().map(Object::toString).orElse(null));
    m.put("ended_at", r.endedAt().map(Object::toString).orElse(null));
    m.put("duration_s", r.duration().toMillis() / 1000.0);
    m.put("outcome", r.outcome());
    m.put("exit_code", r.exitCode().orElse(null));
    m.put("reason", r.reason());
    m.put("start_learning_rate", num(r.startRate()));
    m.put("final_learning_rate", num(r.finalRate()));
    Map<String, Object> best = new LinkedHashMap<>();
    best.put("validation", num(r.bestValidation()));
    best.put("step", r.bestValidationStep() < 0 ? null : r.bestValidationStep());
    best.put("checkpoint", r.bestCheckpoint().orElse(null));
    m.put("best", best);
    List<Map<String, Object>> ivs = new ArrayList<>();
    for (Intervention iv : r.interventions()) {
      Map<String, Object> x = new LinkedHashMap<>();
      x.put("number", iv.number());
      x.put("seq", iv.seq());
      x.put("step", iv.step());
      x.put("at", iv.at() == null ? null : iv.at().toString());
      x.put("guard", iv.guard());
      x.put("detector", iv.detector());
      x.put("evidence", iv.evidence());
      x.put("figures", iv.figures());
      x.put("actions", iv.actions());
      x.put("rate_before", num(iv.rateBefore()));
      x.put("rate_after", num(iv.rateAfter()));
      x.put("ending", iv.ending());
      x.put("rewind_to_step", iv.resumeStep());
      x.put("resume_from", iv.resumeFrom());
      x.put("result", iv.result());
      x.put("confirmed", iv.confirmed());
      x.put("unconfirmed", iv.unconfirmed());
      x.put("confirmation", iv.confirmation());
      x.put("note", iv.note());
      x.put("in_words", TextReport.intervention(iv));
      ivs.add(x);
    }
    m.put("interventions", ivs);
    List<Map<String, Object>> evs = new ArrayList<>();
    for (Event e : r.events()) {
      Map<String, Object> x = new LinkedHashMap<>();
      x.put("seq", e.seq());
      x.put("at", e.at() == null ? null : e.at().toString());
      x.put("type", e.type());
      x.put("text", e.text());
      evs.add(x);
    }
    m.put("events", evs);
    Map<String, Object> counts = new LinkedHashMap<>();
    counts.put("lines", r.lines().orElse(null));
    counts.put("metric_lines", r.metricLines().orElse(null));
    counts.put("ignored_lines", r.ignoredLines().orElse(null));
    counts.put("samples", r.samples());
    counts.put("confirmed_changes", r.interventions().stream().filter(Intervention::confirmed)
        .count());
    counts.put("unconfirmed_changes", r.unconfirmed());
    m.put("counts", counts);
    Map<String, Object> audit = new LinkedHashMap<>();
    audit.put("records", r.auditRecords());
    audit.put("torn_last_line", r.tornLastAuditLine());
    audit.put("bad_lines", r.badAuditLines());
    audit.put("metrics_bad_lines", r.history().badLines());
    m.put("audit_log", audit);
    return m;
  }

  /** JSON has no NaN: unknown numbers become null. */
  static Object num(double v) {
    return Double.isFinite(v) ? v : null;
  }
}
