package dev.stepwarden.cli;

import dev.stepwarden.process.Stops;
import dev.stepwarden.queue.Overrides;
import dev.stepwarden.queue.QueueException;
import dev.stepwarden.rules.CommandCheck;
import dev.stepwarden.rules.ConfigException;
import dev.stepwarden.rules.GuardFile;
import dev.stepwarden.rules.GuardFiles;
import dev.stepwarden.supervise.RunDirectory;
import dev.stepwarden.supervise.RunOutcome;
import dev.stepwarden.supervise.Signals;
import dev.stepwarden.supervise.RunObserver;
import dev.stepwarden.supervise.Preemption;
import dev.stepwarden.supervise.RunOptions;
import dev.stepwarden.supervise.Supervisor;
import dev.stepwarden.telemetry.MetricsServer;
import dev.stepwarden.telemetry.RunMeters;
import io.micrometer.prometheusmetrics.PrometheusMeterRegistry;
import java.io.IOException;
import java.io.PrintWriter;
import java.nio.charset.StandardCharsets;
import java.nio.file.FileAlreadyExistsException;
import java.nio.file.Files;
import java.nio.file.Path;
import java.time.Duration;
import java.util.List;
import java.util.Locale;
import java.util.Map;
import java.util.concurrent.Callable;
import java.util.regex.Matcher;
import java.util.regex.Pattern;
import picocli.CommandLine.Command;
import picocli.CommandLine.Model.CommandSpec;
import picocli.CommandLine.Option;
import picocli.CommandLine.Parameters;
import picocli.CommandLine.Spec;

@Command(name = "run", description = "Supervise one training run in the foreground.",
    footer = {"", "Examples:", "  stepwarden run --rules rules/overnight.yaml -- python3 train.py"
        + " --lr {learning_rate}", "  stepwarden run --resume runs/sensor-net-20260101-220000",
        "  stepwarden run --rules night.yaml --set run.learning_rate=0.05 -- python3 train.py"
            + " --lr {learning_rate}",
        "", "On SIGUSR1 (a batch scheduler's pre-emption notice) the trainer is asked for a"
        + " checkpoint, stopped, the state saved, and stepwarden exits with 75; requeue the job"
        + " with run --resume.", "", ExitCodes.TABLE})
final class RunCommand implements Callable<Integer> {
  @Spec
  CommandSpec spec;

  @Option(names = "--rules", paramLabel = "FILE",
      description = "The guard file (YAML). With --resume: default RUN_DIR/guards.yaml.")
  Path rules;

  @Option(names = "--resume", paramLabel = "RUN_DIR", description = "Continue the run in"
      + " RUN_DIR whose supervisor died or was pre-empted: from its latest healthy vault"
      + " checkpoint, with the saved rate, counters and guard states.")
  Path resume;

  @Option(names = "--on-preempt", paramLabel = "HOW", defaultValue = "control-file",
      description = "How to ask the trainer for a last checkpoint on SIGUSR1: control-file"
          + " (write checkpoint_request into the control file) or signal:NAME (forward a"
          + " signal, e.g. signal:USR1). Default: ${DEFAULT-VALUE}.")
  String onPreempt;

  @Option(names = "--preempt-wait", paramLabel = "DURATION", defaultValue = "30s",
      description = "How long to wait on SIGUSR1 for that checkpoint before stopping the"
          + " trainer (e.g. 30s, 2m). Default: ${DEFAULT-VALUE}.")
  String preemptWait;

  @Option(names = "--copy-vault", description = "Copy checkpoints into the vault instead of"
      + " hard-linking them (for a trainer that overwrites its checkpoint files in place).")
  boolean copyVault;

  @Option(names = "--run-dir", paramLabel = "DIR",
      description = "Where to keep logs, metrics, the audit log and the vault"
          + " (default: runs/NAME-TIMESTAMP).")
  Path runDir;

  @Option(names = {"-q", "--quiet"}, description = "Do not echo the trainer's output.")
  boolean quiet;

  @Option(names = "--metrics-port", paramLabel = "PORT", description = "Serve Prometheus"
      + " metrics on http://127.0.0.1:PORT/metrics while the run lasts (0 picks a free port).")
  Integer metricsPort;

  @Option(names = "--set", paramLabel = "KEY=VALUE", description = "Change the guard file for"
      + " this run, e.g. --set run.learning_rate=0.05 (repeatable; the value is read as YAML,"
      + " as queue add reads it). The run directory keeps the changed file.")
  Map<String, String> sets;

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
    if (sets != null && resume != null) {
      err.println("stepwarden: --resume continues with the run's own guard file; drop --set");
      return ExitCodes.USAGE;
    }
    Preemption preemption;
    try {
      preemption = preemption(onPreempt, preemptWait);
    } catch (IllegalArgumentException e) {
      err.println("stepwarden: " + e.getMessage());
      return ExitCodes.USAGE;
    }
    if (resume != null) {
      return resume(err, preemption);
    }
    if (rules == null) {
      err.println("stepwarden: give the guard file with --rules FILE (or continue a run with"
          + " --resume RUN_DIR)");
      return ExitCodes.USAGE;
    }
    GuardFile g;
    try {
      g = GuardFiles.load(rules);
    } catch (ConfigException e) {
      err.println(e.getMessage());
      return ExitCodes.CONFIG;
    }
    try {
      if (sets != null) {
        g = withSets(rules, sets);
      }
    } catch (ConfigException e) {
      err.println("after --set: " + e.getMessage());
      return ExitCodes.CONFIG;
    } catch (QueueException | IOException e) {
      err.println("stepwarden: " + e.getMessage());
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
    // the command after '--' was not seen by the loader; the script is looked for where the run
    // will start, so a typo costs no crash back-offs
    GuardFile.Run run = g.run();
    java.util.Optional<String> problem = CommandCheck.rateUnreachable(run.command(), g.steer())
        .or(() -> CommandCheck.missingScript(run.command(), run.workdir()));
    if (problem.isPresent()) {
      err.println("stepwarden: " + rules + ": " + problem.get());
      return ExitCodes.CONFIG;
    }
    try (Telemetry t = Telemetry.open(metricsPort, g, err)) {
      RunOptions o = new RunOptions(runDir, quiet, null, null)
          .withPreemption(preemption).withCopyVault(copyVault).withObserver(t.observer());
      return supervise(new Supervisor(g, o), spec.commandLine().getOut(), err).exitCode();
    } catch (IOException e) {
      err.println("stepwarden: " + e.getMessage());
      return ExitCodes.USAGE;
    }
  }

  /**
   * The guard file with {@code --set} applied, loaded from a copy in the temporary folder (the
   * run directory keeps that copy as guards.yaml, so --resume continues with the same settings).
   */
  private static GuardFile withSets(Path rules, Map<String, String> sets)
      throws IOException, QueueException, ConfigException {
    String merged = Overrides.apply(Files.readString(rules, StandardCharsets.UTF_8), sets);
    Path copy = Files.createTempFile("stepwarden-set-", ".yaml");
    copy.toFile().deleteOnExit();
    Files.writeString(copy, merged, StandardCharsets.UTF_8);
    return GuardFiles.load(copy);
  }

  /** The optional Prometheus endpoint of one run, bound to 127.0.0.1. */
  private record Telemetry(MetricsServer server, RunObserver observer) implements AutoCloseable {
    static Telemetry open(Integer port, GuardFile g, PrintWriter err) throws IOException {
      if (port == null) {
        return new Telemetry(null, null);
      }
      PrometheusMeterRegistry registry = MetricsServer.newRegistry();
      MetricsServer server = MetricsServer.start(registry, "127.0.0.1", port);
      err.println("stepwarden: metrics on http://127.0.0.1:" + server.port() + "/metrics");
      return new Telemetry(server, RunMeters.of(registry, g, null));
    }

    @Override
    public void close() {
      if (server != null) {
        server.close();
      }
    }
  }

  private int resume(PrintWriter err, Preemption preemption) {
    if (runDir != null || (command != null && !command.isEmpty())) {
      err.println("stepwarden: --resume continues the run where it is, with its own command;"
          + " drop --run-dir and the command after '--'");
      return ExitCodes.USAGE;
    }
    if (!Files.isDirectory(resume)) {
      err.println("stepwarden: --resume " + resume + ": no such run directory");
      return ExitCodes.USAGE;
    }
    Path file = rules != null ? rules : resume.resolve(RunDirectory.GUARDS);
    if (!Files.isRegularFile(file)) {
      err.println("stepwarden: " + file + " is missing (the run started from a guard file that"
          + " was not on disk); give it with --rules FILE");
      return ExitCodes.USAGE;
    }
    GuardFile g;
    try {
      g = GuardFiles.load(file);
    } catch (ConfigException e) {
      err.println(e.getMessage());
      return ExitCodes.CONFIG;
    }
    try (Telemetry t = Telemetry.open(metricsPort, g, err)) {
      Supervisor s;
      try {
        s = Supervisor.resume(resume, g, new RunOptions(resume, quiet, null, null)
            .withPreemption(preemption).withCopyVault(copyVault).withObserver(t.observer()));
      } catch (IOException | IllegalStateException e) {
        err.println("stepwarden: cannot resume: " + e.getMessage());
        return ExitCodes.USAGE;
      }
      return supervise(s, spec.commandLine().getOut(), err).exitCode();
    } catch (IOException e) {
      err.println("stepwarden: " + e.getMessage());
      return ExitCodes.USAGE;
    }
  }

  static Preemption preemption(String how, String wait) {
    Duration d = duration(wait, "--preempt-wait");
    if (how.equals("control-file")) {
      return new Preemption(null, d);
    }
    if (how.startsWith("signal:")) {
      String name = how.substring("signal:".length()).toUpperCase(Locale.ROOT);
      name = name.startsWith("SIG") ? name.substring(3) : name;
      return new Preemption(name, d);
    }
    throw new IllegalArgumentException("--on-preempt " + how + ": give control-file or"
        + " signal:NAME (e.g. signal:USR1)");
  }

  static Duration duration(String text, String option) {
    return dev.stepwarden.rules.Durations.option(option, text);
  }

  /** Runs a supervisor with a shutdown hook for SIGINT/SIGTERM; prints the short summary. */
  static Ran supervise(GuardFile g, Path runDir, boolean quiet, PrintWriter out,
      PrintWriter err) {
    return supervise(new Supervisor(g, new RunOptions(runDir, quiet, null, null)), out,
        err);
  }

  /**
   * Runs {@code s} with handlers for SIGINT/SIGTERM (the first stops the trainer with its grace,
   * a second kills it at once), a SIGUSR1 handler for pre-emption and a SIGHUP handler that only
   * records it; prints the short summary. A JVM shutdown hook stays as the fallback for a JVM
   * where the handlers cannot be installed ({@code -Xrs}) and for an exit from elsewhere.
   */
  static Ran supervise(Supervisor s, PrintWriter out, PrintWriter err) {
    Signals.install("USR1", () -> s.preempt("SIGUSR1"));
    Signals.install("HUP", s::hangup); // a closed terminal does not end the night
    // Inside serve (which continues runs through this method) TERM and INT are serve's: it stops
    // every run in order itself.
    StopSignals signals = ServeCommand.serving() ? null : StopSignals.take(s::interrupt,
        "stepwarden-stop", err, "stepwarden: %s: stopping the trainer (it has its grace to save"
            + " and exit; signal again to kill it now)",
        "stepwarden: %s again: stopping the trainer now (KILL)");
    Thread hook = new Thread(() -> s.interrupt("SIGINT or SIGTERM"), "stepwarden-shutdown");
    Runtime.getRuntime().addShutdownHook(hook);
    LIVE.add(s);
    try {
      Supervisor.Result r = s.run();
      Summary.print(r, out);
      int code = r.outcome().exitCode();
      if (r.outcome() == RunOutcome.INTERRUPTED && signals != null && signals.exitCode() != 0) {
        code = signals.exitCode(); // 143 for SIGTERM, as a JVM ended by it would give
      }
      return new Ran(r, code);
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
      LIVE.remove(s);
      if (signals != null) {
        signals.close();
      }
      try {
        Runtime.getRuntime().removeShutdownHook(hook);
      } catch (IllegalStateException shuttingDown) {
        // the hook is running: it stops the trainer itself
      }
    }
  }

  /** Runs supervised by this JVM through {@link #supervise}; serve continues unfinished ones so. */
  private static final java.util.Set<Supervisor> LIVE =
      java.util.concurrent.ConcurrentHashMap.newKeySet();

  /**
   * Stops every run this JVM supervises through {@link #supervise}: what the JVM's shutdown does
   * on SIGTERM, for a serve that stops in order before it exits.
   */
  static void interruptAll(String reason) {
    Stops.allAtOnce(LIVE.stream().map(s -> (Runnable) () -> s.interrupt(reason)).toList());
  }

  record Ran(Supervisor.Result result, int exitCode) {}
}
