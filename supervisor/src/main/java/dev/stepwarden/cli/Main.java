package dev.stepwarden.cli;

import dev.stepwarden.control.ControlFile;
import java.io.PrintWriter;
import java.util.List;
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
    footer = {"", ExitCodes.TABLE})
public final class Main implements Runnable {
  /** The subcommands, in the order the root's help lists them. */
  private static final List<Class<?>> SUBCOMMANDS = List.of(RunCommand.class,
      CheckCommand.class, SchemaCommand.class, DemoCommand.class, ReportCommand.class,
      ReplayCommand.class, QueueCommand.class, ServeCommand.class, HelperCommand.class,
      CompletionCommand.class, CommandLine.HelpCommand.class);

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
    CommandLine cl = commandLine(args.length == 0 ? null : args[0]);
    cl.setOut(out);
    cl.setErr(err);
    try {
      return cl.execute(args);
    } finally {
      // print() does not flush an auto-flushing writer: without this a long output (the
      // completion script) was cut at the writer's buffer when the JVM exited into a pipe
      out.flush();
      err.flush();
    }
  }

  /**
   * The whole command tree (help, completion, tests). Use this, not {@code new
   * CommandLine(new Main())}: the subcommands are added here, not by the annotation.
   */
  public static CommandLine commandLine() {
    return commandLine(null);
  }

  /**
   * The root with only the subcommand {@code first} names, when it names one: picocli builds
   * each subcommand's model by reflection, and building all of them was a third of a run's
   * start-up. Anything else ({@code help}, {@code --help}, a typo, {@code completion}) gets the
   * whole tree, so help, suggestions and completion see every subcommand.
   */
  static CommandLine commandLine(String first) {
    CommandLine cl = new CommandLine(new Main());
    Class<?> only = null;
    for (Class<?> c : SUBCOMMANDS) {
      if (c != CompletionCommand.class && c != CommandLine.HelpCommand.class
          && c.getAnnotation(Command.class).name().equals(first)) {
        only = c;
      }
    }
    for (Class<?> c : SUBCOMMANDS) {
      if (only == null || c == only) {
        cl.addSubcommand(c);
      }
    }
    withHelpOptions(cl);
    cl.setExitCodeExceptionMapper(t -> ExitCodes.INTERNAL);
    cl.setParameterExceptionHandler((ex, args) -> {
      CommandLine c = ex.getCommandLine();
      c.getErr().println("stepwarden: " + ex.getMessage());
      if (c.getCommandName().equals("run") && !java.util.Arrays.asList(args).contains("--")
          && ex instanceof CommandLine.UnmatchedArgumentException) {
        // 'run --rules r.yaml python3 train.py --lr 0.1': the trainer's options look like ours
        c.getErr().println("hint: put '--' before the training command, so its options stay"
            + " its own: stepwarden run --rules FILE -- python3 train.py --lr {learning_rate}");
      }
      String renamed = ex instanceof CommandLine.UnmatchedArgumentException u
          ? QueueCommand.renameHint(u.getUnmatched()) : null;
      if (renamed != null) {
        c.getErr().println("stepwarden: " + renamed);
      }
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

  /** Every subcommand takes -h/--help and -V/--version, as the root does. */
  private static void withHelpOptions(CommandLine cl) {
    for (CommandLine sub : cl.getSubcommands().values()) {
      if (!(sub.getCommand() instanceof CommandLine.HelpCommand)) {
        sub.getCommandSpec().mixinStandardHelpOptions(true);
        if (sub.getCommandSpec().version().length == 0) {
          sub.getCommandSpec().versionProvider(new Version());
        }
      }
      withHelpOptions(sub);
    }
  }

  /** The project's version (from the build) and the control-file protocol's. */
  static final class Version implements CommandLine.IVersionProvider {
    @Override
    public String[] getVersion() throws java.io.IOException {
      return new String[] {"stepwarden " + projectVersion(),
          "control protocol " + ControlFile.PROTOCOL
              + " (the helpers of `stepwarden helper` follow the same)"};
    }

    /** Written into the resource by the build (resource filtering of the project version). */
    static String projectVersion() throws java.io.IOException {
      try (java.io.InputStream in = Main.class.getResourceAsStream("version.txt")) {
        if (in == null) {
          throw new java.io.IOException("version.txt is missing from this build");
        }
        return new String(in.readAllBytes(), java.nio.charset.StandardCharsets.UTF_8).strip();
      }
    }
  }
}
