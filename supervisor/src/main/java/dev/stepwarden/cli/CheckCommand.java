package dev.stepwarden.cli;

import dev.stepwarden.rules.CommandCheck;
import dev.stepwarden.rules.ConfigException;
import dev.stepwarden.rules.Explain;
import dev.stepwarden.rules.GuardFile;
import dev.stepwarden.rules.GuardFiles;
import java.nio.file.Path;
import java.util.List;
import java.util.concurrent.Callable;
import picocli.CommandLine.Command;
import picocli.CommandLine.Parameters;
import picocli.CommandLine.Spec;
import picocli.CommandLine.Model.CommandSpec;

@Command(name = "check", description = "Validate guard files and say in plain words what each"
    + " guard will do. Exit 78 on the first file that is invalid.")
final class CheckCommand implements Callable<Integer> {
  @Spec
  CommandSpec spec;

  @Parameters(arity = "1..*", paramLabel = "FILE", description = "Guard files (YAML).")
  List<Path> files;

  @Override
  public Integer call() {
    int code = ExitCodes.OK;
    for (Path f : files) {
      try {
        GuardFile g = GuardFiles.load(f);
        spec.commandLine().getOut().println(f + ": valid");
        // a warning, not a refusal: a guard file may be checked away from where it is run
        CommandCheck.missingScript(g.run().command(), g.run().workdir()).ifPresent(p ->
            spec.commandLine().getErr().println(f + ": warning: " + p + " (run refuses to start"
                + " so)"));
        for (String line : Explain.describe(g)) {
          spec.commandLine().getOut().println("  " + line);
        }
      } catch (ConfigException e) {
        spec.commandLine().getErr().println(e.getMessage());
        code = ExitCodes.CONFIG;
      }
    }
    return code;
  }
}
