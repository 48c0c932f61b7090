package dev.stepwarden.cli;

import java.io.PrintWriter;
import picocli.CommandLine;
import picocli.CommandLine.Command;

/**
 * The {@code stepwarden} command. Each subcommand is a small class in this package; they share
 * the exit codes of {@link ExitCodes} and print refusals as one clear line, never a stack trace.
 */
@Command(name = "stepwarden", mixinStandardHelpOptions = true,
    versionProvider = Main.Version.class,
    description = "Supervises an overnight training run: follows its metrics, applies the guards"
        + " of a YAML file (lower or raise the learning rate, rewind to a checkpoint, restart,"
        + " stop early) and keeps an audit log of every decision.",
    subcommands = {RunCommand.class, CheckCommand.class, SchemaCommand.class, DemoCommand.class,
        ReportCommand.class, ReplayCommand.class, QueueCommand.class, ServeCommand.class,
        HelperCommand.class, CompletionCommand.class, CommandLine.HelpCommand.class},
    footer = {"", ExitCodes.TABLE})
public final class Main implements Runnable {
  @CommandLine.Spec
  CommandLine.Model.CommandSpec spec;

  @Override
  public void run() {
    throw new CommandLine.ParameterException(spec.commandLine(), "name a subcommand");
  }

  public static void main(String[] args) {
    System.exit(execute(args, new PrintWriter(System.out, true), new PrintWriter(System.err,
        true)));
  }

  /** Runs the command line and returns the exit code (tests call this in-process). */
  public static int execute(String[] args, PrintWriter out, PrintWriter err) {
    CommandLine cl = commandLine();
    cl.setOut(out);
    cl.setErr(err);
    return cl.execute(args);
  }

  static CommandLine commandLine() {
    CommandLine cl = new CommandLine(new Main());
    cl.setExitCodeExceptionMapper(t -> ExitCodes.INTERNAL);
    cl.setParameterExceptionHandler((ex, args) -> {
      CommandLine c = ex.getCommandLine();
      c.getErr().println("stepwarden: " + ex.getMessage());
      c.getErr().println("Try 'stepwarden " + (c.getCommandName().equals("stepwarden") ? ""
          : c.getCommandName() + " ") + "--help'.");
      return ExitCodes.USAGE;
    });
    cl.setExecutionExceptionHandler((ex, c, parseResult) -> {
      c.getErr().println("stepwarden: internal error: " + ex);
      return ExitCodes.INTERNAL;
    });
    return cl;
  }

  static final class Version implements CommandLine.IVersionProvider {
    @Override
    public String[] getVersion() {
      String v = Main.class.getPackage().getImplementationVersion();
      return new String[] {"stepwarden " + (v == null ? "development build" : v)};
    }
  }
}
