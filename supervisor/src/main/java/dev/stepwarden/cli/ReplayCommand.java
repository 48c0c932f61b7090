package dev.stepwarden.cli;

import dev.stepwarden.replay.Replay;
import dev.stepwarden.replay.ReplayText;
import dev.stepwarden.rules.ConfigException;
import dev.stepwarden.rules.GuardFile;
import dev.stepwarden.rules.GuardFiles;
import dev.stepwarden.supervise.RunDirectory;
import java.io.IOException;
import java.io.PrintWriter;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.Locale;
import java.util.concurrent.Callable;
import picocli.CommandLine.Command;
import picocli.CommandLine.Model.CommandSpec;
import picocli.CommandLine.Option;
import picocli.CommandLine.Parameters;
import picocli.CommandLine.Spec;
import tools.jackson.databind.SerializationFeature;
import tools.jackson.databind.json.JsonMapper;

@Command(name = "replay", description = "Dry-run the guards of a guard file over a recorded"
    + " metrics file (a run directory's metrics.jsonl, a trainer log, CSV or an event file)"
    + " with the very"
    + " engine of a live run, and say when each guard would have fired and why. Decisions after"
    + " the replay left the recorded course are marked hypothetical.", footer = {"", "Examples:",
        "  stepwarden replay --rules rules/overnight.yaml runs/night-1/metrics.jsonl",
        "  stepwarden replay --rules rules/overnight.yaml train.log --json"})
final class ReplayCommand implements Callable<Integer> {
  private static final JsonMapper JSON = JsonMapper.builder()
      .enable(SerializationFeature.INDENT_OUTPUT).build();

  @Spec
  CommandSpec spec;

  @Option(names = "--rules", paramLabel = "FILE", required = true,
      description = "The guard file (YAML).")
  Path rules;

  @Option(names = "--input", paramLabel = "KIND", description = "How to read METRICS_FILE:"
      + " auto (default), normalized, raw, csv or events.")
  String input = "auto";

  @Option(names = "--json", description = "Print the same facts as JSON, for scripts.")
  boolean json;

  @Parameters(paramLabel = "METRICS_FILE", description = "The recorded metrics (a run"
      + " directory stands for its metrics.jsonl).")
  Path file;

  @Override
  public Integer call() {
    PrintWriter out = spec.commandLine().getOut();
    PrintWriter err = spec.commandLine().getErr();
    GuardFile g;
    try {
      g = GuardFiles.load(rules);
    } catch (ConfigException e) {
      err.println(e.getMessage());
      return ExitCodes.CONFIG;
    }
    Path f = Files.isDirectory(file) ? file.resolve(RunDirectory.METRICS) : file;
    try {
      Replay.Result r;
      if (input.equals("auto")) {
        r = Replay.run(g, f);
      } else {
        Replay.Input kind;
        try {
          kind = Replay.Input.valueOf(input.toUpperCase(Locale.ROOT));
        } catch (IllegalArgumentException e) {
          err.println("stepwarden: --input " + input + ": say auto, normalized, raw, csv or events");
          return ExitCodes.USAGE;
        }
        r = Replay.run(g, f, kind);
      }
      if (json) {
        out.println(JSON.writeValueAsString(ReplayText.toMap(r, f.toString(),
            rules.toString())));
      } else {
        out.print(ReplayText.text(r, f.toString(), rules.toString(), g.guards().size()));
      }
      out.flush();
      return ExitCodes.OK;
    } catch (IOException e) {
      err.println("stepwarden: " + e.getMessage());
      return ExitCodes.USAGE;
    }
  }
}
