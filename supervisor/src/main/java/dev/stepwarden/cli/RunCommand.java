package dev.stepwarden.cli;

import dev.stepwarden.rules.ConfigException;
import dev.stepwarden.rules.GuardFile;
import dev.stepwarden.rules.GuardFiles;
import dev.stepwarden.supervise.Supervisor;
import java.io.IOException;
import java.io.PrintWriter;
import java.nio.file.FileAlreadyExistsException;
import java.nio.file.Path;
import java.util.List;
import java.util.concurrent.Callable;
import picocli.CommandLine.Command;
import picocli.CommandLine.Model.CommandSpec;
import picocli.CommandLine.Option;
import picocli.CommandLine.Parameters;
import picocli.CommandLine.Spec;

@Command(name = "run", description = "Supervise one training run in the foreground.",
    footer = {"", "Example:", "  stepwarden run --rules rules/overnight.yaml -- python3 train.py"
        + " --lr {learning_rate}", "", ExitCodes.TABLE})
final class RunCommand implements Callable<Integer> {
  @Spec
  CommandSpec spec;

  @Option(names = "--rules", paramLabel = "FILE", required = true,
      description = "The guard file (YAML).")
  Path rules;

  @Option(names = "--run-dir", paramLabel = "DIR",
      description = "Where to keep logs, metrics, the audit log and the vault"
          + " (default: runs/NAME-TIMESTAMP).")
  Path runDir;

  @Option(names = {"-q", "--quiet"}, description = "Do not echo the trainer's output.")
  boolean quiet;

  @Parameters(arity = "0..*", paramLabel = "COMMAND",
      description = "The training command after '--' (overrides run.command).")
  List<String> command;

  @Override
  public Integer call() {
    PrintWriter err = spec.commandLine().getErr();
    if (command != null && !command.isEmpty() && command.get(0).startsWith("-")) {
      // picocli hands unknown options to the positional command; a program never starts with '-'
      err.println("stepwarden: unknown option '" + command.get(0) + "' for run; put the training"
          + " command after '--'. Try 'stepwarden run --help'.");
      return ExitCodes.USAGE;
    }
    GuardFile g;
    try {
      g = GuardFiles.load(rules);
    } catch (ConfigException e) {
      err.println(e.getMessage());
      return ExitCodes.CONFIG;
    }
    if (command != null && !command.isEmpty()) {
      g = g.withCommand(command);
    }
    if (g.run().command().isEmpty()) {
      err.println("stepwarden: no command to run: give one after '--' or in run.command of "
          + rules);
      return ExitCodes.USAGE;
    }
    return supervise(g, runDir, quiet, spec.commandLine().getOut(), err).exitCode();
  }

  /** Runs a supervisor with a shutdown hook for SIGINT/SIGTERM; prints the short summary. */
  static Ran supervise(GuardFile g, Path runDir, boolean quiet, PrintWriter out,
      PrintWriter err) {
    Supervisor s = new Supervisor(g, new Supervisor.Options(runDir, quiet, null, null));
    Thread hook = new Thread(() -> s.interrupt("SIGINT or SIGTERM"), "stepwarden-shutdown");
    Runtime.getRuntime().addShutdownHook(hook);
    try {
      Supervisor.Result r = s.run();
      Summary.print(r, out);
      return new Ran(r, r.outcome().exitCode());
    } catch (FileAlreadyExistsException e) {
      err.println("stepwarden: " + e.getFile() + ": " + e.getReason());
      return new Ran(null, ExitCodes.USAGE);
    } catch (IOException e) {
      err.println("stepwarden: " + e.getMessage());
      return new Ran(null, ExitCodes.INTERNAL);
    } catch (InterruptedException e) {
      Thread.currentThread().interrupt();
      return new Ran(null, ExitCodes.INTERRUPTED);
    } finally {
      try {
        Runtime.getRuntime().removeShutdownHook(hook);
      } catch (IllegalStateException shuttingDown) {
        // the hook is running: it stops the trainer itself
      }
    }
  }

  record Ran(Supervisor.Result result, int exitCode) {}
}
