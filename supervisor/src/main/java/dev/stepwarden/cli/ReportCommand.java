package dev.stepwarden.cli;

import dev.stepwarden.report.Overview;
import dev.stepwarden.report.RunReport;
import java.io.IOException;
import java.io.PrintWriter;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.concurrent.Callable;
import picocli.CommandLine.Command;
import picocli.CommandLine.Model.CommandSpec;
import picocli.CommandLine.Option;
import picocli.CommandLine.Parameters;
import picocli.CommandLine.Spec;
import tools.jackson.databind.SerializationFeature;
import tools.jackson.databind.json.JsonMapper;

@Command(name = "report", description = "The morning report of a run directory: each"
    + " intervention with its evidence, how the run ended, and the best validation value with the"
    + " checkpoint that holds it. Given a folder of run directories: one line per run, best"
    + " first.", footer = {"", "Examples:", "  stepwarden report runs/sensor-net-20250101-220000",
        "  stepwarden report runs/ --json", "  stepwarden report RUN_DIR --html morning.html"})
final class ReportCommand implements Callable<Integer> {
  private static final JsonMapper JSON = JsonMapper.builder()
      .enable(SerializationFeature.INDENT_OUTPUT).build();

  @Spec
  CommandSpec spec;

  @Parameters(paramLabel = "RUN_DIR", description = "A run directory, or a folder of them.")
  Path dir;

  @Option(names = "--json", description = "Print the same facts as JSON, for scripts.")
  boolean json;

  @Option(names = "--html", paramLabel = "FILE", description = "Also write a self-contained"
      + " HTML page with the charts (no network needed to view it).")
  Path html;

  @Override
  public Integer call() {
    PrintWriter out = spec.commandLine().getOut();
    PrintWriter err = spec.commandLine().getErr();
    try {
      String page;
      if (RunReport.isRunDirectory(dir)) {
        RunReport r = RunReport.load(dir);
        out.print(json ? JSON.writeValueAsString(r.toMap()) + "\n" : r.text());
        page = html == null ? null : r.html();
      } else if (Overview.holdsRuns(dir)) {
        Overview o = Overview.of(dir);
        out.print(json ? JSON.writeValueAsString(o.toMap()) + "\n" : o.text());
        page = html == null ? null : o.html();
      } else {
        err.println("stepwarden: " + dir + " is neither a run directory (it has no audit.jsonl)"
            + " nor a folder of run directories; give the --run-dir of a run, or the folder"
            + " above several");
        return ExitCodes.USAGE;
      }
      if (page != null) {
        Path parent = html.toAbsolutePath().getParent();
        if (parent != null) {
          Files.createDirectories(parent);
        }
        Files.writeString(html, page, StandardCharsets.UTF_8);
        if (!json) {
          out.println("HTML report written to " + html.toAbsolutePath());
        }
      }
      out.flush();
      return ExitCodes.OK;
    } catch (IOException e) {
      err.println("stepwarden: " + e.getMessage());
      return ExitCodes.INTERNAL;
    }
  }
}
