package dev.stepwarden.report;

import static dev.stepwarden.report.RunReport.fmt;

import java.io.IOException;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.ArrayList;
import java.util.Comparator;
import java.util.LinkedHashMap;
import java.util.List;
import java.util.Locale;
import java.util.Map;
import java.util.stream.Stream;

/**
 * One line per run for a folder of run directories, best first: lowest best validation value
 * first (a loss: lower is better), runs without a validation value last, then by name.
 */
public final class Overview {
  private final Path folder;
  private final List<RunReport> runs;
  private final List<String> unreadable;

  private Overview(Path folder, List<RunReport> runs, List<String> unreadable) {
    this.folder = folder;
    this.runs = List.copyOf(runs);
    this.unreadable = List.copyOf(unreadable);
  }

  /** True when some direct sub-folder of {@code folder} is a run directory. */
  public static boolean holdsRuns(Path folder) throws IOException {
    if (!Files.isDirectory(folder)) {
      return false;
    }
    try (Stream<Path> s = Files.list(folder)) {
      return s.anyMatch(p -> Files.isDirectory(p) && RunReport.isRunDirectory(p));
    }
  }

  /** Reads every run directory directly under {@code folder}. */
  public static Overview of(Path folder) throws IOException {
    List<Path> dirs;
    try (Stream<Path> s = Files.list(folder)) {
      dirs = s.filter(p -> Files.isDirectory(p) && RunReport.isRunDirectory(p)).sorted().toList();
    }
    List<RunReport> runs = new ArrayList<>();
    List<String> bad = new ArrayList<>();
    for (Path d : dirs) {
      try {
        runs.add(RunReport.load(d, 64)); // the overview draws nothing: a coarse history will do
      } catch (IOException | RuntimeException e) {
        bad.add(d.getFileName() + ": " + e.getMessage());
      }
    }
    runs.sort(BEST_FIRST);
    return new Overview(folder.toAbsolutePath().normalize(), runs, bad);
  }

  static final Comparator<RunReport> BEST_FIRST = Comparator
      .comparing((RunReport r) -> Double.isNaN(r.bestValidation()))
      .thenComparingDouble(r -> Double.isNaN(r.bestValidation()) ? 0 : r.bestValidation())
      .thenComparing(r -> r.dir().getFileName().toString());

  public List<RunReport> runs() {
    return runs;
  }

  /** Folders that looked like runs but could not be read, with the reason. */
  public List<String> unreadable() {
    return unreadable;
  }

  public String text() {
    StringBuilder b = new StringBuilder();
    b.append("stepwarden report: ").append(runs.size()).append(" runs in ").append(folder)
        .append(", best first\n\n");
    String head = String.format(Locale.ROOT, "%-28s %-16s %-12s %-8s %-13s %s", "run",
        "outcome", "best val", "at step", "interventions", "duration");
    b.append(head).append('\n').append("-".repeat(head.length())).append('\n');
    for (RunReport r : runs) {
      b.append(String.format(Locale.ROOT, "%-28s %-16s %-12s %-8s %-13d %s",
          r.dir().getFileName(), r.outcome() + r.exitCode().map(c -> " (" + c + ")").orElse(""),
          fmt(r.bestValidation()), r.bestValidationStep() < 0 ? "-" : r.bestValidationStep(),
          r.interventions().size(), TextReport.duration(r.duration())));
      if (r.tornLastAuditLine()) {
        b.append("  [torn last audit line]");
      }
      b.append('\n');
    }
    for (String u : unreadable) {
      b.append("unreadable: ").append(u).append('\n');
    }
    return b.toString();
  }

  public Map<String, Object> toMap() {
    Map<String, Object> m = new LinkedHashMap<>();
    m.put("folder", folder.toString());
    List<Map<String, Object>> rows = new ArrayList<>();
    for (RunReport r : runs) {
      Map<String, Object> x = new LinkedHashMap<>();
      x.put("run", r.dir().getFileName().toString());
      x.put("run_dir", r.dir().toString());
      x.put("outcome", r.outcome());
      x.put("exit_code", r.exitCode().orElse(null));
      x.put("best_validation", JsonReport.num(r.bestValidation()));
      x.put("best_step", r.bestValidationStep() < 0 ? null : r.bestValidationStep());
      x.put("best_checkpoint", r.bestCheckpoint().orElse(null));
      x.put("interventions", r.interventions().size());
      x.put("duration_s", r.duration().toMillis() / 1000.0);
      x.put("torn_last_audit_line", r.tornLastAuditLine());
      rows.add(x);
    }
    m.put("runs", rows);
    m.put("unreadable", unreadable);
    return m;
  }

  public String html() {
    StringBuilder b = new StringBuilder();
    b.append("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\"><title>")
        .append(HtmlPage.esc("stepwarden runs in " + folder)).append("</title><style>")
        .append(HtmlPage.CSS).append("</style></head><body><h1>Runs in ")
        .append(HtmlPage.esc(folder.toString())).append("</h1><p>Best first (lowest validation"
            + " value).</p><table><thead><tr><th>run</th><th>outcome</th><th>best validation"
            + "</th><th>at step</th><th>interventions</th><th>duration</th><th>checkpoint</th>"
            + "</tr></thead><tbody>\n");
    for (RunReport r : runs) {
      b.append("<tr><td>").append(HtmlPage.esc(r.dir().getFileName().toString()))
          .append("</td><td>").append(HtmlPage.esc(r.outcome())).append("</td><td class=\"num\">")
          .append(fmt(r.bestValidation())).append("</td><td class=\"num\">")
          .append(r.bestValidationStep() < 0 ? "-" : r.bestValidationStep())
          .append("</td><td class=\"num\">").append(r.interventions().size())
          .append("</td><td>").append(TextReport.duration(r.duration())).append("</td><td>")
          .append(HtmlPage.esc(r.bestCheckpoint().orElse("-"))).append("</td></tr>\n");
    }
    b.append("</tbody></table></body></html>\n");
    return b.toString();
  }
}
