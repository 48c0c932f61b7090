package dev.stepwarden.cli;

import dev.stepwarden.queue.Night;
import dev.stepwarden.queue.Queue;
import dev.stepwarden.queue.QueueException;
import dev.stepwarden.queue.QueueSettings;
import dev.stepwarden.supervise.Signals;
import dev.stepwarden.telemetry.MetricsServer;
import io.micrometer.prometheusmetrics.PrometheusMeterRegistry;
import java.io.IOException;
import java.io.PrintStream;
import java.io.PrintWriter;
import java.time.Duration;
import java.util.List;
import java.util.concurrent.Callable;
import java.util.concurrent.CountDownLatch;
import java.util.concurrent.TimeUnit;
import java.util.concurrent.atomic.AtomicBoolean;
import java.util.concurrent.atomic.AtomicInteger;
import picocli.CommandLine;
import picocli.CommandLine.Command;
import picocli.CommandLine.Mixin;
import picocli.CommandLine.Model.CommandSpec;
import picocli.CommandLine.Option;
import picocli.CommandLine.Spec;

@Command(name = "serve", mixinStandardHelpOptions = true, description = "Run the queue's jobs on this machine's slots until"
    + " stopped (SIGTERM or SIGINT: running jobs are stopped, audited and resumed by the next"
    + " serve).",
    footer = {"", "Examples:", "  stepwarden serve --gpus '0;1' --metrics-port 9464",
        "  stepwarden serve --db jdbc:postgresql://db/stepwarden --cluster --runs /shared/runs"})
final class ServeCommand implements Callable<Integer> {
  /** How long a stopping serve waits for its runs to be stopped and recorded. */
  static final long STOP_WAIT_MS = 60_000;

  @Spec
  CommandSpec spec;

  @Mixin
  QueueCommand.Where where = new QueueCommand.Where();

  @Option(names = "--slots", paramLabel = "N", description = "Jobs at a time (default: one per"
      + " --gpus group, else 1).")
  Integer slots;

  @Option(names = "--gpus", paramLabel = "IDS", description = "GPU ids per slot: commas within a"
      + " slot, ';' between slots (or repeat the option): --gpus '0,1;2,3'. Each job gets its"
      + " slot's ids in CUDA_VISIBLE_DEVICES.")
  List<String> gpus;

  @Option(names = "--metrics-port", paramLabel = "PORT", description = "Serve Prometheus"
      + " metrics on http://HOST:PORT/metrics (0 picks a free port; default off).")
  Integer metricsPort;

  @Option(names = "--metrics-host", paramLabel = "HOST", description = "Address for the metrics"
      + " (default 127.0.0.1; 0.0.0.0 in a container).")
  String metricsHost = "127.0.0.1";

  @Option(names = "--cluster", description = "Share the --db queue with other serve processes;"
      + " a live node takes over the jobs of a dead one.")
  boolean cluster;

  @Option(names = "--checkin", paramLabel = "DURATION", description = "Cluster check-in interval"
      + " (default 5s); a node silent this long plus 7.5 s is taken over.")
  String checkin = "5s";

  @Option(names = "--no-median-stop", description = "Do not apply the median stopping rule to"
      + " jobs of a --cohort.")
  boolean noMedian;

  @Option(names = "--median-quorum", paramLabel = "N", description = "The median rule judges"
      + " once this many completed runs of the cohort have reached the step (default 3).")
  int medianQuorum = 3;

  @Option(names = "--median-from-step", paramLabel = "STEP", description = "The median rule"
      + " does not judge before this step (default 0).")
  long medianFromStep;

  @Option(names = "--median-series", paramLabel = "SERIES", description = "The series the"
      + " median rule compares, lower is better (default validation).")
  String medianSeries = "validation";

  @Option(names = "--keep-history", paramLabel = "DAYS", description = "Forget ended jobs this"
      + " many days after they ended (their run directories stay; default 90; 0 keeps them"
      + " all). See also queue purge.")
  int keepHistoryDays = 90;

  @Override
  public Integer call() {
    // Counted from before the queue starts: a job it resumes at once must already find that its
    // TERM and INT are serve's (it would otherwise take them, and put the JVM's own handlers back
    // over serve's when it ends).
    SERVES.incrementAndGet();
    try {
      return serve();
    } finally {
      SERVES.decrementAndGet();
    }
  }

  private int serve() {
    PrintWriter out = spec.commandLine().getOut();
    PrintWriter err = spec.commandLine().getErr();
    QueueSettings settings;
    List<String> plan;
    Duration every;
    try {
      every = parseDuration(checkin);
      settings = where.settings(cluster, every);
      plan = Night.Options.plan(slots, gpus);
      if (keepHistoryDays < 0) {
        throw new IllegalArgumentException("--keep-history " + keepHistoryDays + ": give a"
            + " number of days, or 0 to keep every ended job");
      }
    } catch (IllegalArgumentException | QueueException e) {
      err.println("stepwarden: " + e.getMessage());
      return ExitCodes.USAGE;
    }
    PrometheusMeterRegistry registry = metricsPort == null ? null : MetricsServer.newRegistry();
    MetricsServer metrics = null;
    Queue queue = null;
    Night night = null;
    try {
      if (registry != null) {
        metrics = MetricsServer.start(registry, metricsHost, metricsPort);
      }
      queue = Queue.openForServe(settings, plan.size());
      PrintStream console = new PrintStream(new java.io.FileOutputStream(
          java.io.FileDescriptor.err), true, java.nio.charset.StandardCharsets.UTF_8);
      night = queue.serve(new Night.Options(plan, registry, console, !noMedian, medianSeries,
          medianQuorum, medianFromStep, keepHistoryDays == 0 ? null
              : Duration.ofDays(keepHistoryDays)));
      out.println("stepwarden serve: node " + night.node() + ", " + plan.size() + " slot(s),"
          + " queue " + (settings.jdbcUrl() == null ? settings.home() : settings.jdbcUrl())
          + ", runs in " + settings.runs());
      if (metrics != null) {
        out.println("stepwarden serve: metrics on http://" + metricsHost + ":" + metrics.port()
            + "/metrics");
      }
      out.flush();
      return stopInOrder(night, metrics);
    } catch (QueueException | IOException e) {
      err.println("stepwarden: " + e.getMessage());
      if (night != null) {
        night.close();
      } else if (queue != null) {
        queue.close();
      }
      if (metrics != null) {
        metrics.close();
      }
      return ExitCodes.USAGE;
    } catch (InterruptedException e) {
      Thread.currentThread().interrupt();
      return ExitCodes.INTERRUPTED;
    }
  }

  /**
   * Serves until SIGTERM or SIGINT, then stops in order and returns 143 or 130. Serve takes these
   * two signals itself rather than leaving them to the JVM's shutdown: the embedded store's own
   * exit hook would close the database at once, while a slot may still be recording its job's
   * end and the running jobs are being given their resume triggers (a slot stuck retrying on the
   * closed database held the exit for many seconds). So every database write is done before
   * the JVM exits. A shutdown hook still stops in the same way on any other exit (another
   * signal, or a JVM where the handlers cannot be installed). Bounded by {@link #STOP_WAIT_MS}.
   */
  private static int stopInOrder(Night night, MetricsServer metrics)
      throws InterruptedException {
    CountDownLatch stopped = new CountDownLatch(1);
    AtomicBoolean begun = new AtomicBoolean();
    Runnable stop = () -> {
      if (!begun.compareAndSet(false, true)) {
        awaitQuietly(stopped); // stopping already: an exit during the stop waits for it
        return;
      }
      Thread closer = new Thread(night::close, "stepwarden-serve-close");
      closer.setDaemon(true);
      // a thread started from a signal handler has no context class loader; Quartz needs one
      closer.setContextClassLoader(ServeCommand.class.getClassLoader());
      closer.start();
      try {
        closer.join(STOP_WAIT_MS);
      } catch (InterruptedException e) {
        Thread.currentThread().interrupt();
      }
      if (metrics != null) {
        metrics.close();
      }
      stopped.countDown();
    };
    StopSignals signals = StopSignals.take(name -> stop.run(), "stepwarden-serve-stop",
        new PrintWriter(System.err, true), null,
        "stepwarden serve: signalled again: stopping the trainers now (KILL)");
    // a closed terminal does not stop the queue (nor, through the JVM's shutdown, its runs)
    Runnable restoreHup = Signals.replace("HUP", () -> { });
    Thread hook = new Thread(stop, "stepwarden-serve-stop");
    Runtime.getRuntime().addShutdownHook(hook);
    try {
      stopped.await();
    } finally {
      signals.close();
      if (restoreHup != null) {
        restoreHup.run();
      }
      try {
        Runtime.getRuntime().removeShutdownHook(hook);
      } catch (IllegalStateException shuttingDown) {
        // the hook is the one stopping
      }
    }
    return signals.exitCode(); // 0 (ExitCodes.OK) when no signal stopped it
  }

  /** Serves running in this JVM (a test may run more than one). */
  private static final AtomicInteger SERVES = new AtomicInteger();

  /**
   * Whether a serve runs in this JVM: TERM and INT are then serve's, and the runs it continues
   * through {@code run --resume} leave them alone, since serve stops all its runs in order (or,
   * where its handlers cannot be installed, its shutdown hook does).
   */
  static boolean serving() {
    return SERVES.get() > 0;
  }

  private static void awaitQuietly(CountDownLatch latch) {
    try {
      latch.await(STOP_WAIT_MS + 5_000, TimeUnit.MILLISECONDS);
    } catch (InterruptedException e) {
      Thread.currentThread().interrupt();
    }
  }

  static Duration parseDuration(String text) {
    return dev.stepwarden.rules.Durations.option("--checkin", text);
  }

}
