package dev.stepwarden.supervise;

import dev.stepwarden.audit.AuditLog;
import dev.stepwarden.checkpoints.CheckpointLedger;
import dev.stepwarden.controller.BranchChoice;
import dev.stepwarden.checkpoints.CheckpointVault;
import dev.stepwarden.rundir.RunBusyException;
import dev.stepwarden.rundir.RunLock;
import dev.stepwarden.control.ControlFile;
import dev.stepwarden.metrics.MetricsIntake;
import dev.stepwarden.metrics.MetricsSources;
import dev.stepwarden.metrics.ReadPlan;
import dev.stepwarden.metrics.Sample;
import dev.stepwarden.process.LaunchSpec;
import dev.stepwarden.process.LineBatch;
import dev.stepwarden.process.LineBatchListener;
import dev.stepwarden.process.StopResult;
import dev.stepwarden.process.TrainerProcess;
import dev.stepwarden.process.TrainerStream;
import dev.stepwarden.engine.Decision;
import dev.stepwarden.engine.GuardEngine;
import dev.stepwarden.rules.GuardFile;
import dev.stepwarden.rules.GuardFiles;
import java.io.IOException;
import java.io.PrintStream;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.nio.file.StandardOpenOption;
import java.nio.channels.FileChannel;
import java.time.Instant;
import java.time.Clock;
import java.time.Duration;
import java.util.ArrayDeque;
import java.util.ArrayList;
import java.util.LinkedHashMap;
import java.util.List;
import java.util.Locale;
import java.util.Map;
import java.util.Optional;
import java.util.OptionalInt;
import java.util.concurrent.BlockingQueue;
import java.util.concurrent.LinkedBlockingQueue;
import java.util.concurrent.TimeUnit;
import java.util.regex.Matcher;
import java.util.regex.Pattern;
import tools.jackson.databind.JsonNode;
import tools.jackson.databind.json.JsonMapper;

/**
 * Supervises one training run from launch to the morning: the path one metric line takes is
 * pump thread -> {@link MetricsIntake} -> normalized metrics file -> {@link GuardEngine} ->
 * audit record (forced to disk) -> action -> outcome record.
 *
 * <p>Design: pump threads parse and decide under one lock, and carry out only what is quick and
 * never blocks on the trainer (writing the control file). Anything that stops the trainer
 * (ending the run, a rewind, a restart) is handed to the supervising thread through a queue, since
 * stopping waits for the pumps to drain and must never run on a pump thread. The supervising
 * thread also does the periodic work: exit detection, checkpoint scans, the silence watchdog and
 * confirmation time-outs. Wall time comes from the injected {@link Clock}.
 *
 * <p>Checkpoints: the ledger is scanned on every tick and on every validation sample, so the step
 * a checkpoint gets (the step when it first appeared) is close to the truth; healthy ones are kept
 * in the run directory's vault at once, and every rewind or restart resumes from the vault copy,
 * verified against its hash. Restarts continue the step axis ({@link MetricsIntake#continueAfter})
 * and mark the checkpoints of the branch left behind as abandoned.
 *
 * <p>Resume: after every launch, decision, checkpoint and confirmation (and every few seconds
 * while steps advance) {@code state.json} is replaced atomically. {@link #resume} reads it back,
 * cuts a torn last audit record (the supervisor was killed mid-write), and relaunches the trainer
 * from the latest healthy vault checkpoint with the saved rate and counters.
 *
 * <p>Pre-emption ({@link #preempt}): asks the trainer for a checkpoint (a control-file request or
 * a forwarded signal), waits a bounded time for one to settle, stops the tree, saves the state and
 * ends with {@link RunOutcome#REQUEUE}.
 */
public final class Supervisor {
  private static final JsonMapper JSON = JsonMapper.builder().build();
  private static final Pattern OOM = Pattern.compile(
      "(?i)(out of memory|OutOfMemoryError|CUDA error: out of memory|MemoryError|Killed)");
  private static final long TICK_MILLIS = 200;
  private static final Pattern PLACEHOLDER = Pattern.compile("\\{([a-z_]+)}");
  private static final Duration FOLLOW_INTERVAL = Duration.ofMillis(100);
  private static final long SETTLE_MILLIS = 500;
  private static final long STATE_EVERY_MILLIS = 5_000;
  private static final int MISSING_KEY_WARNING_AFTER = 1_000;

  /** What the run came to. */
  public record Result(RunOutcome outcome, String reason, Path runDir, Path auditLog,
      int interventions, double finalRate, Optional<CheckpointLedger.Entry> bestCheckpoint,
      double bestValidation, long bestValidationStep) {}

  /**
   * Options that are not part of the guard file.
   *
   * @param preemption what to do on {@link #preempt} (SIGUSR1)
   * @param copyVault copy checkpoints into the vault instead of hard-linking them
   */
  public record Options(Path runDir, boolean quiet, Clock clock, PrintStream console,
      RunObserver observer, Preemption preemption, boolean copyVault) {
    public Options {
      clock = clock == null ? Clock.systemUTC() : clock;
      console = console == null ? System.err : console;
      observer = observer == null ? RunObserver.NONE : observer;
      preemption = preemption == null ? Preemption.DEFAULT : preemption;
    }

    public Options(Path runDir, boolean quiet, Clock clock, PrintStream console,
        RunObserver observer) {
      this(runDir, quiet, clock, console, observer, null, false);
    }

    public Options(Path runDir, boolean quiet, Clock clock, PrintStream console) {
      this(runDir, quiet, clock, console, null);
    }

    public Options withPreemption(Preemption p) {
      return new Options(runDir, quiet, clock, console, observer, p, copyVault);
    }

    public Options withCopyVault(boolean copy) {
      return new Options(runDir, quiet, clock, console, observer, preemption, copy);
    }

    public Options withObserver(RunObserver o) {
      return new Options(runDir, quiet, clock, console, o, preemption, copyVault);
    }
  }

  /**
   * How the trainer is asked for a last checkpoint when the supervisor is pre-empted.
   *
   * @param signal a signal name to forward to the trainer (USR1, TERM, ...), or null to write
   *     {@code "checkpoint_request"} into the control file
   * @param patience how long to wait for a new checkpoint to settle before stopping the trainer
   */
  public record Preemption(String signal, Duration patience) {
    public static final Preemption DEFAULT = new Preemption(null, Duration.ofSeconds(30));

    public Preemption {
      if (signal != null && !signal.matches("[A-Z0-9]+")) {
        throw new IllegalArgumentException("signal name '" + signal + "': give it like USR1 or"
            + " TERM (upper case, without SIG)");
      }
      patience = patience == null ? Duration.ofSeconds(30) : patience;
    }
  }

  private sealed interface Request {
    record End(Decision decision, Long decisionSeq) implements Request {}

    record Relaunch(String reason, Long decisionSeq, long targetStep, int skipBatches,
        boolean fromCheckpoint) implements Request {}

    record Preempt(String why) implements Request {}

    /** A validation value arrived: the trainer typically saves right after it evaluates. */
    record Scan() implements Request {}

    /** The trainer exited and its output drained: look now rather than at the next tick. */
    record Wake() implements Request {}
  }

  private static final Request SCAN = new Request.Scan();
  private static final Request WAKE = new Request.Wake();

  private GuardFile rules;
  private final Options options;
  private final Clock clock;
  private final Object lock = new Object();
  private final BlockingQueue<Request> requests = new LinkedBlockingQueue<>();
  private final ArrayDeque<String> recentStderr = new ArrayDeque<>();

  private RunDirectory dir;
  private AuditLog audit;
  private ControlFile control;
  /** Every source of the read plan (stdout, stderr, followed files), one step axis. */
  private MetricsSources intake;
  private int[] stdoutSources = new int[0];
  private int[] stderrSources = new int[0];
  private GuardEngine engine;
  private CheckpointLedger ledger;
  private NormalizedWriter metricsOut;
  private Path workdir;

  private volatile TrainerProcess trainer;
  private volatile boolean finished;
  private volatile boolean interrupted;
  /** The signal that interrupted the run (SIGTERM ends with 143, anything else with 130). */
  private volatile String interruptedBy;
  /** Counted down by {@link #interrupt}: a crash back-off waits on it, not on a plain sleep. */
  private final java.util.concurrent.CountDownLatch stopRequested =
      new java.util.concurrent.CountDownLatch(1);
  private int generation;
  /**
   * The newest generation whose follow-up is decided (a rewind, a restart, an ending): its
   * remaining lines are logged and written, never judged again, and nothing else follows it.
   */
  private int endedGeneration;
  /** The follow-up decided for the live generation, saved so a resume carries it out. */
  private Planned planned;
  /** The last rate the live generation reported (NaN: none yet). */
  private double reportedRate = Double.NaN;
  private int attempt;
  private int crashRestarts;
  private int interventions;
  private long lastMetricMillis;
  /** Whether the current launch has printed a metric yet (until then the startup limit holds). */
  private boolean metricSinceLaunch;
  private double lastTrain = Double.NaN;
  private double lastValidation = Double.NaN;
  private boolean missingWarned;
  private Pending pending;
  private String resumeFrom = "";
  private long currentStep = -1;
  private long stateSavedStep = -1;
  private long stateSavedMillis;
  private JsonNode resumed;
  /** The probe's launch printed no training loss: the run ends instead of guessing. */
  private boolean probeReadNothing;
  /** Non-null while the rate probe's throw-away launch runs. */
  private RateProbe probing;

  /**
   * A rate the trainer has yet to confirm. {@code atLaunch}: published for a launch, whose clock
   * starts at the generation's first metric (start-up time is not the trainer's to control).
   */
  private record Pending(long revision, double rate, long sinceMillis, Long decisionSeq,
      boolean atLaunch, boolean afterFallback) {}

  /** A decided relaunch, kept in state.json until the launch happened. */
  private record Planned(String reason, long targetStep, int skipBatches) {}

  public Supervisor(GuardFile rules, Options options) {
    if (rules.run().command().isEmpty()) {
      throw new IllegalArgumentException("no command to run: give one in run.command of the"
          + " guard file or after '--'");
    }
    this.rules = rules;
    this.options = options;
    this.clock = options.clock();
  }

  /** The run directory, once {@link #run()} has created it. */
  public Path runDir() {
    return dir == null ? null : dir.root();
  }

  /**
   * A supervisor that continues the run in {@code runDir}, whose supervisor died, was
   * pre-empted or was interrupted (SIGINT, SIGTERM, a serve stopping), from its
   * {@code state.json}. {@code rules} is the run's guard file (normally
   * {@code RUN_DIR/guards.yaml}); the command, working directory and environment come from the
   * saved state, so a command given after {@code --} at the start is kept.
   *
   * @throws IOException when the state file is missing or damaged
   * @throws IllegalStateException when the run already ended
   */
  public static Supervisor resume(Path runDir, GuardFile rules, Options options)
      throws IOException {
    return resume(runDir, rules, options, Map.of());
  }

  /**
   * As {@link #resume(Path, GuardFile, Options)}, with {@code env} laid over the saved
   * environment (a null value removes a variable): what belongs to where the run continues,
   * not to the run, such as the GPUs of the queue slot that resumes it.
   */
  public static Supervisor resume(Path runDir, GuardFile rules, Options options,
      Map<String, String> env) throws IOException {
    Path root = runDir.toAbsolutePath().normalize();
    Optional<String> live = RunLock.liveHolder(root);
    if (live.isPresent()) { // refused at once, before the state file is even read
      throw new RunBusyException(root, live.get());
    }
    JsonNode state = StateFile.read(root.resolve(RunDirectory.STATE));
    // An interrupted run was stopped from outside, not finished: it may go on (a serve that
    // was stopped resumes its jobs so). Every other ending is final.
    if (state.path("ended").asBoolean(false)
        && !"interrupted".equals(state.path("outcome").asString(""))) {
      throw new IllegalStateException("the run in " + root + " already ended ("
          + state.path("outcome").asString("?") + "); there is nothing to resume");
    }
    GuardFile.Run saved = StateFile.run(state.path("run"));
    Map<String, String> merged = new LinkedHashMap<>(saved.env());
    env.forEach((k, v) -> {
      if (v == null) {
        merged.remove(k);
      } else {
        merged.put(k, v);
      }
    });
    GuardFile g = rules.withRun(new GuardFile.Run(saved.name(), saved.command(),
        saved.learningRate(), saved.workdir(), merged, saved.stopGrace()));
    Supervisor s = new Supervisor(g, new Options(root, options.quiet(), options.clock(),
        options.console(), options.observer(), options.preemption(), options.copyVault()));
    s.resumed = state;
    return s;
  }

  /** Runs the night; returns when the trainer finished, a guard ended it, or it was stopped. */
  public Result run() throws IOException, InterruptedException {
    try {
      if (resumed == null) {
        prepare();
        if (rules.probe().isPresent()) {
          probe(rules.probe().get());
        }
      } else {
        prepareResume();
      }
    } catch (IOException | InterruptedException | RuntimeException e) {
      finished = true;
      closeQuietly(); // releases the run's lock: a serve's JVM lives on
      throw e;
    }
    try {
      if (interrupted) {
        return interruptedBeforeLaunch();
      }
      if (probeReadNothing) {
        synchronized (lock) {
          return result(RunOutcome.GAVE_UP, "the rate probe read no training loss from the"
              + " trainer: check that read.series.train names the key of the training loss the"
              + " trainer prints (" + rules.read().allSeries().get("train") + ") and that it"
              + " prints one before its first checkpoint; trainer.stdout.log and"
              + " trainer.stderr.log in the run directory show what it printed");
        }
      }
      Planned plan = planned;
      launch(resumed == null ? "start" : "resume",
          plan == null ? 0 : plan.skipBatches(), null, null);
      return loop();
    } catch (IOException e) {
      // The run directory failed us (a full disk, most often): without an audit log the run
      // cannot be supervised, so stop the trainer's tree rather than leave it unwatched.
      failSafe(e);
      throw new IOException("cannot write the run directory " + dir.root() + " ("
          + e.getMessage() + "); the trainer was stopped and its checkpoints are untouched;"
          + " free some space or choose another --run-dir", e);
    } finally {
      finished = true;
      closeQuietly();
    }
  }

  /** A signal came before any trainer ran (start-up, probe, back-off): end without one. */
  private Result interruptedBeforeLaunch() throws IOException {
    synchronized (lock) {
      return result(RunOutcome.INTERRUPTED, "interrupted by a signal before the run's trainer"
          + " was launched");
    }
  }

  private void failSafe(IOException cause) {
    TrainerProcess t = trainer;
    StopResult stop = t == null ? null : t.stop();
    try {
      synchronized (lock) {
        Map<String, Object> f = new LinkedHashMap<>();
        f.put("error", cause.getMessage());
        f.put("trainer_stopped", stop != null && stop.wasAlive());
        f.put("note", "the supervisor cannot write its run directory; the trainer was stopped"
            + " safely and its checkpoints are untouched");
        audit.append("supervisor-failure", f);
      }
    } catch (IOException again) {
      options.console().println("stepwarden: the audit log cannot record the failure either: "
          + again.getMessage());
    }
  }

  /**
   * Called from a shutdown hook on SIGINT/SIGTERM: stops the trainer's tree (TERM, grace, KILL)
   * and writes the audit record. Does nothing when the run has already ended.
   */
  public void interrupt(String signal) {
    if (finished) {
      return;
    }
    // Record first, then stop: the supervising thread closes the log once it sees the flag.
    try {
      synchronized (lock) {
        Map<String, Object> f = new LinkedHashMap<>();
        f.put("signal", signal);
        f.put("step", intake == null ? -1 : intake.lastStep());
        f.put("learning_rate", engine == null ? null : engine.rate());
        f.put("action", "stopping the trainer's process group (TERM, grace, KILL)");
        if (audit != null) {
          audit.append("interrupted", f);
        }
        flushMetrics();
      }
    } catch (IOException e) {
      options.console().println("stepwarden: " + e.getMessage());
    }
    interruptedBy = signal;
    interrupted = true;
    stopRequested.countDown();
    TrainerProcess t = trainer;
    if (t != null) {
      t.stop();
    }
  }

  /**
   * SIGHUP (the terminal that started the run went away): recorded, and the run goes on. A night
   * run must not die with an SSH session; its output is in the run directory.
   */
  public void hangup() {
    if (finished) {
      return;
    }
    try {
      synchronized (lock) {
        if (audit != null) {
          Map<String, Object> f = new LinkedHashMap<>();
          f.put("signal", "SIGHUP");
          f.put("step", intake == null ? -1 : intake.lastStep());
          f.put("action", "none: the run goes on (stop it with SIGINT or SIGTERM)");
          audit.append("hangup", f);
        }
      }
    } catch (IOException e) {
      options.console().println("stepwarden: " + e.getMessage());
    }
  }

  /** Pre-emption: stop at the next tick after asking the trainer for a checkpoint. */
  public void preempt(String why) {
    if (!finished) {
      requests.add(new Request.Preempt(why));
    }
  }

  private void prepare() throws IOException {
    dir = RunDirectory.create(options.runDir(), rules.run().name(), clock.instant());
    workdir = rules.run().workdir() == null ? Path.of("").toAbsolutePath()
        : rules.run().workdir().toAbsolutePath();
    rules = rules.withRun(new GuardFile.Run(rules.run().name(), rules.run().command(),
        rules.run().learningRate(), workdir, rules.run().env(), rules.run().stopGrace()));
    if (rules.source() != null && Files.isRegularFile(rules.source())) {
      // Written into the 0600 file: Files.copy would give it the source's mode (often 0644).
      Files.write(dir.privateFile(RunDirectory.GUARDS), Files.readAllBytes(rules.source()));
    }
    audit = AuditLog.open(dir.privateFile(RunDirectory.AUDIT), clock);
    control = new ControlFile(dir.file(RunDirectory.CONTROL), 0);
    openSources();
    engine = new GuardEngine(rules);
    ledger = newLedger();
    if (ledger != null) {
      ledger.baseline(); // an earlier run's files: their step is unknown
    }
    metricsOut = NormalizedWriter.append(dir.privateFile(RunDirectory.METRICS));
    Map<String, Object> f = new LinkedHashMap<>();
    f.put("name", rules.run().name());
    f.put("command", rules.run().command());
    f.put("workdir", workdir.toString());
    f.put("rules", rules.source() == null ? null : rules.source().toString());
    f.put("run_dir", dir.root().toString());
    f.put("learning_rate", engine.rate());
    f.put("steer", rules.steer().by().name().toLowerCase(Locale.ROOT).replace('_', '-'));
    f.put("guards", rules.guards().stream().map(GuardFile.Guard::name).toList());
    audit.append("run-start", f);
    lastMetricMillis = clock.millis();
  }

  /**
   * The rate probe: a throw-away launch whose rate is ramped through the control file, stopped
   * when the ramp ends or the loss runs away; the range read off it ({@code RangeTest}) sets the
   * starting rate, and the real run then starts from scratch. Its checkpoints are baselined so
   * that no rewind ever lands on them.
   */
  private void probe(GuardFile.Probe p) throws IOException, InterruptedException {
    RateProbe rp = new RateProbe(p, rules.read());
    if (!throwAway(rp, "rate probe")) {
      return;
    }
    double rate = rules.run().learningRate();
    dev.stepwarden.stats.RangeTest.Reading r;
    synchronized (lock) {
      r = rp.reading();
      if (r.found()) {
        rate = clampRate(r.pick());
      }
      Map<String, Object> f = new LinkedHashMap<>();
      f.put("steps", rp.steps());
      f.put("found", r.found());
      f.put("lower", r.found() ? r.lower() : null);
      f.put("upper", r.found() ? r.upper() : null);
      f.put("learning_rate", rate);
      f.put("note", r.note());
      f.put("levels", rp.levels());
      audit.append("probe", f);
      say("rate probe: " + r.note());
      if (rp.steps() == 0) {
        probeReadNothing = true;
        return;
      }
    }
    if (r.found() && p.branch() > 0) {
      rate = checkPick(rate, p.branch());
    }
    synchronized (lock) {
      GuardFile.Run run = rules.run();
      rules = rules.withRun(new GuardFile.Run(run.name(), run.command(), rate, run.workdir(),
          run.env(), run.stopGrace()));
      engine = new GuardEngine(rules);
      if (ledger != null) {
        ledger.baseline();
      }
      lastMetricMillis = clock.millis();
    }
  }

  private double clampRate(double rate) {
    return Math.min(rules.limits().maxRate(), Math.max(rules.limits().minRate(), rate));
  }

  /**
   * Checks the probe's pick (one rung of successive halving, Li et al. 2017, anchored on the
   * pick): launches from scratch at the pick x 1/2, 1 and 2 for {@code samples} training samples
   * each, and keeps the rate whose branch ends lowest by more than noise ({@link BranchChoice}).
   * The branches, their cost and the verdict go to the audit log as one {@code branches} record.
   */
  private double checkPick(double pick, int samples) throws IOException, InterruptedException {
    double[] rates = {clampRate(pick / 2), pick, clampRate(pick * 2)};
    List<BranchChoice.Branch> branches = new ArrayList<>();
    List<Map<String, Object>> rows = new ArrayList<>();
    for (double rate : rates) {
      RateProbe b = RateProbe.branch(rate, samples, rules.read());
      if (!throwAway(b, "rate branch")) {
        return pick;
      }
      double[] losses = b.lastLevelLosses();
      branches.add(new BranchChoice.Branch(rate, losses));
      Map<String, Object> row = new LinkedHashMap<>();
      row.put("learning_rate", rate);
      row.put("steps", b.steps());
      rows.add(row);
    }
    BranchChoice.Verdict v = BranchChoice.choose(branches, 1);
    double rate = v.index() < 0 ? pick : v.rate();
    synchronized (lock) {
      for (int i = 0; i < rows.size(); i++) {
        rows.get(i).put("tail_mean", Double.isNaN(v.means()[i]) ? null : v.means()[i]);
      }
      Map<String, Object> f = new LinkedHashMap<>();
      f.put("pick", pick);
      f.put("branches", rows);
      f.put("steps", rows.stream().mapToLong(m -> ((Number) m.get("steps")).longValue()).sum());
      f.put("welch_t", Double.isNaN(v.t()) ? null : v.t());
      f.put("learning_rate", rate);
      f.put("note", v.note());
      audit.append("branches", f);
      say("rate branches: " + v.note() + "; starting at " + formatRate(rate));
    }
    return rate;
  }

  /**
   * Runs one throw-away launch fed to {@code rp} until it is done, the trainer exits or a signal
   * comes; false when a signal came before it launched.
   */
  private boolean throwAway(RateProbe rp, String reason) throws IOException,
      InterruptedException {
    synchronized (lock) {
      probing = rp;
    }
    if (interrupted) {
      return false;
    }
    launch(reason, 0, rp.rate(), null);
    while (true) {
      synchronized (lock) {
        if (rp.done() || interrupted) {
          break;
        }
      }
      if (trainer.waitFor(Duration.ofMillis(50)).isPresent()) {
        break;
      }
    }
    trainer.stop();
    synchronized (lock) {
      generation++;
      probing = null;
      rp.close();
    }
    return true;
  }

  /** Opens the read plan's sources; followed files feed lines from their own threads. */
  private void openSources() {
    intake = new MetricsSources(rules.read());
    stdoutSources = intake.sourcesOf(ReadPlan.Source.STDOUT);
    stderrSources = intake.sourcesOf(ReadPlan.Source.STDERR);
    intake.follow(workdir, FOLLOW_INTERVAL, (source, line, cut) -> {
      synchronized (lock) {
        if (interrupted || finished) {
          return;
        }
        if (probing != null) {
          publishProbeRate(probing.acceptSource(source, line, clock.millis()));
          return; // the probe launch's lines are the probe's, not the guards'
        }
        try {
          handle(source, line, cut);
        } catch (IOException e) {
          requests.add(new Request.End(null, null));
          options.console().println("stepwarden: " + e.getMessage());
        }
      }
    });
  }

  private CheckpointLedger newLedger() {
    return rules.checkpoints().map(c -> new CheckpointLedger(workdir, c.watch(),
        new CheckpointVault(dir.file(RunDirectory.VAULT), c.keep(), options.copyVault()),
        SETTLE_MILLIS)).orElse(null);
  }

  private void prepareResume() throws IOException {
    JsonNode st = resumed;
    dir = RunDirectory.resumed(options.runDir());
    workdir = rules.run().workdir() == null ? Path.of("").toAbsolutePath()
        : rules.run().workdir().toAbsolutePath();
    long tornBytes = cutTornAuditTail(dir.file(RunDirectory.AUDIT));
    audit = AuditLog.open(dir.privateFile(RunDirectory.AUDIT), clock);
    control = new ControlFile(dir.file(RunDirectory.CONTROL), st.path("control_revision").asLong());
    openSources();
    engine = new GuardEngine(rules);
    engine.restore(StateFile.engine(st.path("engine")));
    attempt = st.path("attempt").asInt();
    crashRestarts = st.path("crash_restarts").asInt();
    interventions = st.path("interventions").asInt();
    long lastStep = st.path("last_step").asLong(-1);
    ledger = newLedger();
    if (ledger != null) {
      List<CheckpointLedger.Entry> entries = new ArrayList<>();
      st.path("ledger").path("entries").forEach(n -> entries.add(StateFile.entry(n)));
      List<CheckpointLedger.Seen> seen = new ArrayList<>();
      st.path("ledger").path("seen").forEach(n -> seen.add(StateFile.seen(n)));
      ledger.restore(entries, seen);
    }
    metricsOut = NormalizedWriter.append(dir.privateFile(RunDirectory.METRICS));
    JsonNode plan = st.path("planned_relaunch");
    if (plan.isObject()) {
      // Killed between a decision and its relaunch: carry out what was decided, from the target
      // chosen then (not from a checkpoint written after the trouble began).
      planned = new Planned(plan.path("reason").asString("resume"),
          plan.path("target_step").asLong(Long.MAX_VALUE), plan.path("skip_batches").asInt());
    }
    Optional<CheckpointLedger.Entry> target = chooseTarget(
        planned == null ? Long.MAX_VALUE : planned.targetStep());
    resumeFrom = target.map(e -> e.usable().toString()).orElse("");
    ledgerInUse(target);
    currentStep = target.map(CheckpointLedger.Entry::step).orElse(-1L);
    if (target.isPresent()) {
      intake.continueAfter(target.get().step());
      ledger.abandonAfter(target.get().step());
    } else if (ledger != null) {
      ledger.abandonAfter(-1);
    }
    Map<String, Object> f = new LinkedHashMap<>();
    f.put("state_saved_at", st.path("saved_at").asString(null));
    f.put("last_step_before", lastStep);
    f.put("torn_audit_bytes_removed", tornBytes);
    f.put("learning_rate", engine.rate());
    f.put("attempts_before", attempt);
    f.put("rewinds_before", engine.rewinds());
    f.put("crash_restarts_before", crashRestarts);
    f.put("resume_from", resumeFrom.isEmpty() ? null : resumeFrom);
    f.put("resume_step", target.map(CheckpointLedger.Entry::step).orElse(null));
    f.put("planned_relaunch", planned == null ? null : planned.reason());
    f.put("result", target.isPresent() ? "continuing from the vault checkpoint of step "
        + target.get().step() : "no healthy checkpoint: starting again from scratch at the saved"
        + " rate");
    audit.append("run-resume", f);
    lastMetricMillis = clock.millis();
  }

  /**
   * A supervisor killed mid-append can leave a last line without its newline: cut it (our own
   * file), so the continued log has no torn record. Returns the bytes removed.
   */
  static long cutTornAuditTail(Path log) throws IOException {
    if (!Files.isRegularFile(log)) {
      return 0;
    }
    try (FileChannel ch = FileChannel.open(log, StandardOpenOption.READ,
        StandardOpenOption.WRITE)) {
      long size = ch.size();
      long keep = size;
      java.nio.ByteBuffer one = java.nio.ByteBuffer.allocate(1);
      while (keep > 0) {
        one.clear();
        ch.read(one, keep - 1);
        if (one.get(0) == '\n') {
          break;
        }
        keep--;
      }
      if (keep < size) {
        ch.truncate(keep);
        ch.force(true);
      }
      return size - keep;
    }
  }

  private void ledgerInUse(Optional<CheckpointLedger.Entry> target) {
    if (ledger != null) {
      ledger.inUse(target.map(CheckpointLedger.Entry::vault).orElse(null));
    }
  }

  /** The newest healthy vault checkpoint at or before {@code step} whose bytes are intact. */
  private Optional<CheckpointLedger.Entry> chooseTarget(long step) throws IOException {
    if (ledger == null) {
      return Optional.empty();
    }
    while (true) {
      Optional<CheckpointLedger.Entry> t = ledger.latestHealthyAtOrBefore(step);
      if (t.isEmpty() || ledger.verify(t.get())) {
        return t;
      }
      Map<String, Object> f = new LinkedHashMap<>();
      f.put("path", t.get().usable().toString());
      f.put("step", t.get().step());
      f.put("message", "the vault copy no longer matches its hash; not using it");
      audit.append("vault-warning", f);
    }
  }

  /** Replaces state.json; called under the lock after anything a resume needs to know. */
  private void saveState(boolean ended, String outcome) throws IOException {
    if (dir == null || engine == null) {
      return;
    }
    Map<String, Object> m = new LinkedHashMap<>();
    m.put("version", StateFile.VERSION);
    m.put("saved_at", Instant.now(clock).toString());
    m.put("ended", ended);
    m.put("outcome", outcome);
    m.put("run", StateFile.run(rules.run()));
    m.put("learning_rate", engine.rate());
    m.put("attempt", attempt);
    m.put("crash_restarts", crashRestarts);
    m.put("rewinds", engine.rewinds());
    m.put("interventions", interventions);
    m.put("control_revision", control.revision());
    m.put("last_step", currentStep);
    m.put("resume_from", resumeFrom);
    if (planned != null) {
      Map<String, Object> p = new LinkedHashMap<>();
      p.put("reason", planned.reason());
      p.put("target_step", planned.targetStep());
      p.put("skip_batches", planned.skipBatches());
      m.put("planned_relaunch", p);
    }
    m.put("engine", StateFile.engine(engine.snapshot()));
    if (ledger != null) {
      Map<String, Object> l = new LinkedHashMap<>();
      l.put("glob", ledger.glob());
      l.put("vault_copying", ledger.vault().map(CheckpointVault::copying).orElse(false));
      l.put("entries", ledger.entries().stream().map(StateFile::entry).toList());
      l.put("seen", ledger.seen().stream().map(StateFile::seen).toList());
      m.put("ledger", l);
    }
    StateFile.write(dir.file(RunDirectory.STATE), m);
    stateSavedStep = currentStep;
    stateSavedMillis = clock.millis();
  }

  /**
   * Starts a generation: publishes its rate to the control file (forced to disk) first, so that
   * whatever the trainer reads at its start is the rate of this launch, and the same rate goes
   * into {@code {learning_rate}}; then expects the trainer to confirm it.
   *
   * @param probeRate the rate probe's first rate for the probe's launch, else null
   * @param decisionSeq the decision this launch carries out, if any
   */
  private void launch(String reason, int skipBatches, Double probeRate, Long decisionSeq)
      throws IOException {
    attempt++;
    int gen = ++generation;
    double rate = probeRate == null ? engine.rate() : probeRate;
    if (probeRate == null) {
      engine.beginGeneration(Math.max(currentStep, 0), resumeFrom.isEmpty());
    }
    long revision = control.publish(rate, probeRate == null ? "(launch " + attempt + ")"
        : "(probe)", Math.max(currentStep, 0));
    reportedRate = Double.NaN;
    pending = probeRate == null ? new Pending(revision, rate, -1, decisionSeq, true,
        "change not confirmed".equals(reason)) : null;
    Map<String, String> values = new LinkedHashMap<>();
    values.put("learning_rate", formatRate(rate));
    values.put("resume_from", resumeFrom);
    values.put("skip_batches", Integer.toString(skipBatches));
    values.put("attempt", Integer.toString(attempt));
    values.put("run_dir", dir.root().toString());
    List<String> argv = new ArrayList<>();
    for (String word : rules.run().command()) {
      argv.add(fill(word, values));
    }
    Map<String, String> env = new LinkedHashMap<>(rules.run().env());
    env.put("STEPWARDEN_CONTROL", control.path().toString());
    env.put("STEPWARDEN_RUN_DIR", dir.root().toString());
    Map<String, Object> cmd = new LinkedHashMap<>();
    cmd.put("argv", argv);
    cmd.put("workdir", workdir.toString());
    cmd.put("env", env);
    cmd.put("attempt", attempt);
    Files.writeString(dir.privateFile(RunDirectory.COMMAND), JSON.writeValueAsString(cmd) + "\n",
        StandardCharsets.UTF_8, StandardOpenOption.TRUNCATE_EXISTING, StandardOpenOption.WRITE);
    LaunchSpec spec = LaunchSpec.builder()
        .command(argv)
        .workingDirectory(workdir)
        .environment(env)
        .stdoutLog(dir.privateFile(RunDirectory.STDOUT))
        .stderrLog(dir.privateFile(RunDirectory.STDERR))
        .echo(!options.quiet())
        .stopGrace(rules.run().stopGrace())
        .maxLineChars(rules.read().lineLimit())
        .build();
    metricSinceLaunch = false; // before the pumps start: their first metric sets it
    trainer = TrainerProcess.start(spec, new LineBatchListener() {
      @Override
      public void onLines(TrainerStream stream, LineBatch lines) {
        Supervisor.this.onLines(gen, stream == TrainerStream.STDERR, lines);
      }
    });
    trainer.whenDrained(() -> requests.offer(WAKE));
    Map<String, Object> f = new LinkedHashMap<>();
    f.put("attempt", attempt);
    f.put("reason", reason);
    f.put("pid", trainer.pid());
    f.put("argv", argv);
    f.put("learning_rate", rate);
    f.put("control_revision", revision);
    f.put("resume_from", resumeFrom);
    f.put("skip_batches", skipBatches);
    audit.append("launch", f);
    lastMetricMillis = clock.millis();
    planned = null; // carried out: a resume from here on continues this launch
    saveState(false, null);
    options.observer().onLaunch(attempt, reason);
  }

  /** Fills {@code {name}} placeholders; the values are numbers and paths we produced ourselves. */
  static String fill(String word, Map<String, String> values) {
    // One pass over the template only: a value (a checkpoint path, say) that itself contains
    // "{attempt}" or shell characters is passed on verbatim, never expanded again.
    Matcher m = PLACEHOLDER.matcher(word);
    StringBuilder out = new StringBuilder();
    while (m.find()) {
      String name = m.group(1);
      String value = GuardFiles.PLACEHOLDERS.contains(name) ? values.getOrDefault(name, "")
          : m.group();
      m.appendReplacement(out, Matcher.quoteReplacement(value));
    }
    m.appendTail(out);
    return out.toString();
  }

  static String formatRate(double rate) {
    return Double.toString(rate);
  }

  /** Feeds the rate probe one line; moves its ramp on through the control file. Under the lock. */
  private void probeLine(boolean stderr, String line) {
    publishProbeRate(probing.accept(stderr, line, clock.millis()));
  }

  private void publishProbeRate(double next) {
    if (Double.isFinite(next)) {
      try {
        control.publish(next, "(probe)", probing.steps());
      } catch (IOException e) {
        probing.finish();
      }
    }
  }

  /** The lines of one pump read under one lock acquisition, parsed from the pump's bytes. */
  private void onLines(int gen, boolean stderr, LineBatch lines) {
    synchronized (lock) {
      if (probing != null) {
        // The probe launch's lines are the probe's, not the guards' (the pump delivers batches
        // only, so this is the probe's real input).
        for (int k = 0; k < lines.size() && gen == generation && !interrupted; k++) {
          probeLine(stderr, lines.text(k));
        }
        return;
      }
      int[] sources = stderr ? stderrSources : stdoutSources;
      try {
        // One wall time per read: its lines arrived together (and a clock read per line was a
        // measurable share of a flood).
        long now = clock.millis();
        for (int k = 0; k < lines.size(); k++) {
          if (gen != generation || interrupted) {
            return; // a stopped trainer's last words: its decisions are no longer ours to make
          }
          if (stderr) {
            rememberStderr(lines.text(k));
          }
          for (int i : sources) {
            handle(i, intake.accept(i, lines.bytes(), lines.offset(k), lines.length(k), now,
                lines.cut(k)), now, gen);
          }
        }
      } catch (IOException e) {
        requests.add(new Request.End(null, null));
        options.console().println("stepwarden: " + e.getMessage());
      }
    }
  }

  private void rememberStderr(String line) {
    if (recentStderr.size() == 20) {
      recentStderr.removeFirst();
    }
    recentStderr.addLast(line.length() > 500 ? line.substring(0, 500) : line);
  }

  private void handle(int source, String line, boolean cut) throws IOException {
    long now = clock.millis();
    // A followed file's line belongs to the generation live when it is read.
    handle(source, intake.accept(source, line, now, cut), now, generation);
  }

  /** Whether the generation's lines may still drive decisions (its follow-up is not decided). */
  private boolean judging(int gen) {
    return gen == generation && gen > endedGeneration;
  }

  /** Marks the live generation as ended: exactly one follow-up, already queued, comes next. */
  private void endGeneration(Planned plan) throws IOException {
    endedGeneration = generation;
    pending = null;
    planned = plan;
    saveState(false, null);
  }

  private void handle(int source, MetricsIntake.Reading r, long now, int gen)
      throws IOException {
    if (r == null) {
      warnMissingKeys();
      return;
    }
    boolean judge = judging(gen);
    if (judge && r.hasRate()) {
      reportedRate = r.reportedRate();
    }
    if (judge && pending != null && pending.atLaunch() && pending.sinceMillis() < 0
        && r.sample() != null) {
      pending = new Pending(pending.revision(), pending.rate(), now, pending.decisionSeq(), true,
          pending.afterFallback()); // the confirmation clock starts at the first metric
    }
    if (judge && pending != null && confirms(r)) {
      Map<String, Object> f = new LinkedHashMap<>();
      f.put("decision_seq", pending.decisionSeq());
      f.put("for", pending.atLaunch() ? "launch " + attempt : "live change");
      f.put("revision", pending.revision());
      f.put("learning_rate", pending.rate());
      f.put("after_ms", now - Math.max(0, pending.sinceMillis()));
      f.put("by", r.hasRevision() && r.appliedRevision() >= pending.revision()
          ? "applied_revision" : "reported rate");
      audit.append("confirmed", f);
      pending = null;
      saveState(false, null);
    }
    Sample s = r.sample();
    if (s == null) {
      return;
    }
    lastMetricMillis = now;
    metricSinceLaunch = true;
    currentStep = s.step();
    int ti = s.indexOf("train");
    if (ti >= 0) {
      lastTrain = s.valueAt(ti);
    }
    int vi = s.indexOf("validation");
    if (vi >= 0) {
      lastValidation = s.valueAt(vi);
      // Scanning hashes new checkpoints, which can take seconds for big ones: the supervising
      // thread does it, so this pump thread goes on draining the trainer's output.
      requests.offer(SCAN);
    }
    writeNormalized(source, s);
    warnMissingKeys();
    // An ended generation's lines are written, never judged: its follow-up is already decided.
    Optional<Decision> d = judge ? engine.onSample(s) : Optional.empty();
    RunObserver o = options.observer();
    if (o != RunObserver.NONE) {
      o.onSample(s, engine.rate());
      o.onLines(intake.lines(), intake.metricLines(), intake.ignoredLines());
    }
    if (d.isPresent()) {
      options.observer().onDecision(d.get());
      act(d.get());
    }
  }

  private boolean confirms(MetricsIntake.Reading r) {
    if (r.hasRevision() && r.appliedRevision() >= pending.revision()) {
      return true;
    }
    return r.hasRate()
        && Math.abs(r.reportedRate() - pending.rate()) <= 1e-4 * Math.abs(pending.rate());
  }

  private void warnMissingKeys() throws IOException {
    if (missingWarned) {
      return;
    }
    // the sources decide when: after two epochs of a source that prints epochs, else 1,000 lines
    Optional<String> msg = intake.missingKeysWarning(MISSING_KEY_WARNING_AFTER);
    if (msg.isEmpty()) {
      return;
    }
    missingWarned = true; // the sources give their warning at most once
    Map<String, Object> f = new LinkedHashMap<>();
    f.put("after_lines", intake.lines());
    f.put("message", msg.get());
    audit.append("warning", f);
    options.console().println("stepwarden: warning: " + msg.get());
  }


  private void act(Decision d) throws IOException {
    interventions++;
    long seq = audit.append("decision", decisionFields(d));
    saveState(false, null);
    say("step " + d.step() + ": guard '" + d.guard() + "' fired: " + d.evidence().summary()
        + (d.changesRate() ? "; rate " + d.rateBefore() + " -> " + d.rateAfter() : ""));
    if (d.ending() != Decision.Ending.CONTINUE) {
      endGeneration(null);
      requests.add(new Request.End(d, seq));
      return;
    }
    if (d.rewinds()) {
      relaunchLater(new Request.Relaunch("rewind", seq, onsetStep(d), d.skipBatches(), true));
      return;
    }
    if (!d.changesRate()) {
      return;
    }
    if (rules.steer().by() == GuardFile.Steer.Method.RESTART) {
      relaunchLater(new Request.Relaunch("new rate by restart", seq, intake.lastStep(), 0,
          true));
      return;
    }
    long revision = control.publish(d.rateAfter(), d.guard(), d.step());
    Map<String, Object> f = new LinkedHashMap<>();
    f.put("decision_seq", seq);
    f.put("result", "control file revision " + revision + " written");
    f.put("revision", revision);
    f.put("learning_rate", d.rateAfter());
    audit.append("outcome", f);
    pending = new Pending(revision, d.rateAfter(), clock.millis(), seq, false, false);
    saveState(false, null);
  }

  /** Ends the live generation with a relaunch: state first (a resume carries it out), then it. */
  private void relaunchLater(Request.Relaunch rl) throws IOException {
    endGeneration(new Planned(rl.reason(), rl.targetStep(), rl.skipBatches()));
    requests.add(rl);
  }

  private static long onsetStep(Decision d) {
    Object onset = d.evidence().figures().get("onset_step");
    if (onset instanceof Number n) {
      return n.longValue();
    }
    Object best = d.evidence().figures().get("best_step");
    return best instanceof Number n ? n.longValue() : d.step();
  }

  private static Map<String, Object> decisionFields(Decision d) {
    Map<String, Object> f = new LinkedHashMap<>();
    f.put("step", d.step());
    f.put("guard", d.guard());
    f.put("detector", d.evidence().detector());
    f.put("evidence", d.evidence().summary());
    f.put("figures", d.evidence().figures());
    f.put("action", d.actions().stream().map(Supervisor::describe).toList());
    f.put("rate_before", d.rateBefore());
    f.put("rate_after", d.rateAfter());
    f.put("ending", d.ending().name().toLowerCase(Locale.ROOT));
    if (!d.note().isEmpty()) {
      f.put("note", d.note());
    }
    return f;
  }

  static String describe(GuardFile.Action a) {
    if (a instanceof GuardFile.Action.Scale s) {
      return "scale " + s.factor();
    }
    if (a instanceof GuardFile.Action.SetRate s) {
      return "set_rate " + s.rate();
    }
    if (a instanceof GuardFile.Action.Rewind r) {
      return r.skipBatches() > 0 ? "rewind, skip " + r.skipBatches() + " batches" : "rewind";
    }
    return a instanceof GuardFile.Action.Stop ? "stop" : "give_up";
  }

  private Result loop() throws IOException, InterruptedException {
    // The periodic work (confirmation time-outs, state saves, silence, scans) runs once per tick
    // however many requests arrive: a trainer reporting validation more often than the tick
    // must not starve it (each validation value queues a scan).
    long nextTick = System.nanoTime() + TimeUnit.MILLISECONDS.toNanos(TICK_MILLIS);
    while (true) {
      long waitNanos = nextTick - System.nanoTime();
      Request req = waitNanos > 0 ? requests.poll(waitNanos, TimeUnit.NANOSECONDS)
          : requests.poll();
      if (interrupted) {
        StopResult stop = trainer.stop(); // idempotent: waits for the hook's stop to finish
        synchronized (lock) {
          return result(RunOutcome.INTERRUPTED, "interrupted by a signal; the trainer was "
              + (stop.killed() ? "killed after the grace" : "stopped"));
        }
      }
      if (req instanceof Request.End end) {
        return end(end.decision());
      }
      if (req instanceof Request.Relaunch rl) {
        relaunch(rl);
        continue;
      }
      if (req instanceof Request.Preempt p) {
        return preempted(p.why());
      }
      if (req instanceof Request.Scan) {
        scanUnlocked(clock.millis());
      }
      TrainerProcess t = trainer;
      OptionalInt exit = t.waitFor(Duration.ZERO);
      if (exit.isPresent()) {
        // The pumps have drained: a decision on the last lines wins over the exit itself.
        Request last = requests.poll();
        if (last != null) {
          requests.add(last);
          continue;
        }
        Result r = exited(exit.getAsInt());
        if (r != null) {
          return r;
        }
        continue;
      }
      if (System.nanoTime() - nextTick >= 0) {
        periodic();
        nextTick = System.nanoTime() + TimeUnit.MILLISECONDS.toNanos(TICK_MILLIS);
      }
    }
  }

  private boolean healthyNow() {
    return (Double.isNaN(lastTrain) || Double.isFinite(lastTrain))
        && (Double.isNaN(lastValidation) || Double.isFinite(lastValidation));
  }

  /** Scans the checkpoint glob, audits what settled, keeps the vault trim; under the lock. */
  private int scanCheckpoints(long now) throws IOException {
    return scanCheckpoints(now, false);
  }

  private int scanCheckpoints(long now, boolean forceSettle) throws IOException {
    if (ledger == null) {
      return 0;
    }
    return recordScan(ledger.scan(currentStep, lastTrain, lastValidation, healthyNow(), now,
        forceSettle));
  }

  /**
   * Scans without holding the lock while files are hashed, so the pumps keep draining the
   * trainer's pipes; the run's state is read before and the results recorded after, under it.
   */
  private void scanUnlocked(long now) throws IOException {
    if (ledger == null) {
      return;
    }
    long step;
    double train;
    double validation;
    boolean healthy;
    synchronized (lock) {
      step = currentStep;
      train = lastTrain;
      validation = lastValidation;
      healthy = healthyNow();
    }
    List<CheckpointLedger.Entry> fresh = ledger.scan(step, train, validation, healthy, now,
        false);
    synchronized (lock) {
      recordScan(fresh);
    }
  }

  /** Audits what a scan found and keeps the vault trim; under the lock. */
  private int recordScan(List<CheckpointLedger.Entry> fresh) throws IOException {
    for (CheckpointLedger.Notice n : ledger.drainNotices()) {
      audit.append(n.type(), n.fields());
      say(String.valueOf(n.fields().get("message")));
    }
    for (CheckpointLedger.Entry e : fresh) {
      Map<String, Object> f = new LinkedHashMap<>();
      f.put("path", e.path().toString());
      f.put("step", e.step());
      f.put("size", e.size());
      f.put("sha256", e.sha256());
      f.put("train", StateFile.num(e.train()));
      f.put("validation", StateFile.num(e.validation()));
      f.put("healthy", e.healthy());
      f.put("vault", e.vault() == null ? null : e.vault().toString());
      f.put("vault_by", e.vault() == null ? null
          : ledger.vault().get().copying() ? "copy" : "hard link");
      audit.append("checkpoint", f);
    }
    if (!fresh.isEmpty()) {
      List<Path> removed = ledger.prune();
      if (!removed.isEmpty()) {
        Map<String, Object> f = new LinkedHashMap<>();
        f.put("removed", removed.stream().map(Path::toString).toList());
        f.put("kept", ledger.entries().stream().filter(e -> e.vault() != null)
            .map(e -> e.vault().toString()).toList());
        audit.append("vault-pruned", f);
      }
      saveState(false, null);
    }
    return fresh.size();
  }

  private void periodic() throws IOException {
    long now = clock.millis();
    scanUnlocked(now);
    synchronized (lock) {
      flushMetrics();
      if (currentStep != stateSavedStep && now - stateSavedMillis >= STATE_EVERY_MILLIS) {
        saveState(false, null);
      }
      if (endedGeneration == generation) {
        return; // the follow-up is decided: nothing of this generation is judged any more
      }
      if (pending != null && pending.sinceMillis() >= 0
          && now - pending.sinceMillis() > rules.steer().confirmWithin().toMillis()) {
        notConfirmed(now);
      }
      Duration silence = metricSinceLaunch ? rules.limits().silence()
          : rules.limits().startupSilence();
      if (!silence.isZero() && now - lastMetricMillis > silence.toMillis()) {
        Map<String, Object> f = new LinkedHashMap<>();
        f.put("quiet_ms", now - lastMetricMillis);
        f.put("limit_ms", silence.toMillis());
        f.put("step", intake.lastStep());
        f.put("before_first_metric", !metricSinceLaunch);
        audit.append("silence", f);
        say((metricSinceLaunch ? "no metric for " : "no first metric since the launch, ")
            + (now - lastMetricMillis) / 1000 + " s: treating the trainer as hung");
        lastMetricMillis = now;
        if (crashRestarts >= rules.limits().crashRestarts()) {
          endGeneration(null);
          requests.add(new Request.End(null, null));
        } else {
          crashRestarts++;
          relaunchLater(new Request.Relaunch("hang", null, intake.lastStep(), 0, true));
        }
      }
    }
  }

  /**
   * The trainer did not confirm the pending rate in time: says so with both rates and applies
   * {@code steer.unconfirmed}. A restart that was itself the fallback is not repeated, and a
   * trainer that reports no rate at all is not restarted over it (a restart cannot change that).
   */
  private void notConfirmed(long now) throws IOException {
    Pending p = pending;
    pending = null;
    boolean restart = rules.steer().restartWhenUnconfirmed() && !p.afterFallback()
        && (!p.atLaunch() || !Double.isNaN(reportedRate));
    Map<String, Object> f = new LinkedHashMap<>();
    f.put("decision_seq", p.decisionSeq());
    f.put("for", p.atLaunch() ? "launch " + attempt : "live change");
    f.put("revision", p.revision());
    f.put("learning_rate", p.rate());
    f.put("reported_rate", Double.isNaN(reportedRate) ? null : reportedRate);
    f.put("waited_ms", now - p.sinceMillis());
    f.put("fallback", restart ? "restart" : "none");
    audit.append("not-confirmed", f);
    say("the trainer did not confirm rate " + p.rate() + " within "
        + rules.steer().confirmWithin().toSeconds() + " s (it reports "
        + (Double.isNaN(reportedRate) ? "no rate" : Double.toString(reportedRate)) + ")");
    if (restart) {
      relaunchLater(new Request.Relaunch("change not confirmed", p.decisionSeq(),
          intake.lastStep(), 0, true));
    }
  }

  private void relaunch(Request.Relaunch rl) throws IOException {
    StopResult stop = trainer.stop();
    synchronized (lock) {
      generation++; // lines still draining from the old trainer are ignored
      Optional<CheckpointLedger.Entry> target = Optional.empty();
      if (rl.fromCheckpoint() && ledger != null) {
        ledger.scan(currentStep, lastTrain, lastValidation, false, clock.millis());
        target = chooseTarget(rl.targetStep());
      }
      resumeFrom = target.map(e -> e.usable().toString()).orElse("");
      ledgerInUse(target);
      int abandoned = ledger == null ? 0
          : ledger.abandonAfter(target.map(CheckpointLedger.Entry::step).orElse(-1L));
      Map<String, Object> f = new LinkedHashMap<>();
      f.put("reason", rl.reason());
      f.put("decision_seq", rl.decisionSeq());
      f.put("trainer_killed", stop.killed());
      f.put("resume_from", resumeFrom.isEmpty() ? null : resumeFrom);
      f.put("resume_step", target.map(CheckpointLedger.Entry::step).orElse(null));
      f.put("checkpoint_original", target.map(e -> e.path().toString()).orElse(null));
      f.put("sha256", target.map(CheckpointLedger.Entry::sha256).orElse(null));
      f.put("target_step", rl.targetStep());
      f.put("checkpoints_abandoned", abandoned);
      f.put("learning_rate", engine.rate());
      f.put("result", target.isPresent() ? "restarting from the checkpoint of step "
          + target.get().step() : "restarting from scratch (no healthy checkpoint before step "
          + rl.targetStep() + ")");
      audit.append("outcome", f);
      pending = null;
      currentStep = target.map(CheckpointLedger.Entry::step).orElse(-1L);
      if (target.isPresent()) {
        intake.continueAfter(target.get().step());
      }
      if (interrupted) {
        return; // the loop ends the run; no trainer is launched after a stop signal
      }
      launch(rl.reason(), rl.skipBatches(), null, rl.decisionSeq());
    }
  }

  private Result exited(int code) throws IOException, InterruptedException {
    synchronized (lock) {
      flushMetrics();
      Map<String, Object> f = new LinkedHashMap<>();
      f.put("exit_code", code);
      f.put("step", intake.lastStep());
      // A clean exit means nothing is still writing; after a crash a file may be half-written.
      scanCheckpoints(clock.millis(), code == 0);
      if (code == 0) {
        audit.append("trainer-exit", f);
        return result(RunOutcome.FINISHED, "the trainer finished normally");
      }
      String oom = recentStderr.stream().filter(l -> OOM.matcher(l).find()).findFirst()
          .orElse(null);
      if (oom != null) {
        f.put("out_of_memory", oom);
      } else if (code == 137) {
        f.put("note", "killed by signal 9; possibly the kernel's out-of-memory killer");
      }
      f.put("stderr_tail", List.copyOf(recentStderr));
      audit.append("crash", f);
      if (crashRestarts >= rules.limits().crashRestarts()) {
        return result(RunOutcome.GAVE_UP, "the trainer exited with code " + code
            + (oom != null ? " (out of memory)" : "") + " and the crash-restart budget ("
            + rules.limits().crashRestarts() + ") is spent");
      }
      crashRestarts++;
      // The count and the planned restart reach state.json before the back-off: a supervisor
      // killed while waiting resumes with the crash counted.
      endGeneration(new Planned("crash", intake.lastStep(), 0));
    }
    long backoff = Math.min(rules.limits().crashBackoff().toMillis() << (crashRestarts - 1),
        300_000L);
    say("trainer exited with code " + code + "; restart " + crashRestarts + " of "
        + rules.limits().crashRestarts() + " in " + backoff + " ms");
    if (stopRequested.await(backoff, TimeUnit.MILLISECONDS)) {
      return null; // a stop signal during the back-off: the loop ends the run, no relaunch
    }
    relaunch(new Request.Relaunch("crash", null, intake.lastStep(), 0, true));
    return null;
  }

  private Result end(Decision d) throws IOException {
    StopResult stop = trainer.stop();
    synchronized (lock) {
      generation++;
      flushMetrics();
      scanCheckpoints(clock.millis(), !stop.killed());
      RunOutcome outcome = d == null ? RunOutcome.GAVE_UP
          : d.ending() == Decision.Ending.STOP_EARLY ? RunOutcome.STOPPED_EARLY
          : RunOutcome.GAVE_UP;
      String reason = d == null ? "the supervisor stopped the run (see the previous record)"
          : "guard '" + d.guard() + "': " + d.evidence().summary()
              + (d.note().isEmpty() ? "" : " (" + d.note() + ")");
      Map<String, Object> f = new LinkedHashMap<>();
      f.put("result", outcome == RunOutcome.STOPPED_EARLY ? "stopped early" : "gave up");
      f.put("trainer_killed", stop.killed());
      audit.append("outcome", f);
      return result(outcome, reason);
    }
  }

  private Result preempted(String why) throws IOException, InterruptedException {
    Preemption how = options.preemption();
    int before;
    TrainerProcess t = trainer;
    synchronized (lock) {
      before = ledger == null ? 0 : ledger.entries().size();
      Map<String, Object> f = new LinkedHashMap<>();
      f.put("why", why);
      f.put("step", currentStep);
      f.put("wait_ms", how.patience().toMillis());
      if (how.signal() != null) {
        f.put("asked_by", "signal " + how.signal() + " to pid " + t.pid());
        audit.append("preempt", f);
        sendSignal(how.signal(), t.pid());
      } else {
        long rev = control.requestCheckpoint(engine.rate(), "(pre-emption)", currentStep);
        f.put("asked_by", "control file revision " + rev + " with "
            + ControlFile.CHECKPOINT_REQUEST_KEY);
        audit.append("preempt", f);
      }
    }
    say("pre-empted (" + why + "): waiting up to " + how.patience().toSeconds()
        + " s for a checkpoint");
    long deadline = System.nanoTime() + how.patience().toNanos();
    boolean got = false;
    while (!got && System.nanoTime() < deadline && t.waitFor(Duration.ZERO).isEmpty()) {
      Thread.sleep(TICK_MILLIS);
      synchronized (lock) {
        scanCheckpoints(clock.millis());
        got = ledger != null && ledger.entries().size() > before;
      }
    }
    StopResult stop = t.stop();
    synchronized (lock) {
      generation++;
      flushMetrics();
      scanCheckpoints(clock.millis(), !stop.killed());
      Optional<CheckpointLedger.Entry> latest = ledger == null ? Optional.empty()
          : ledger.latestHealthyAtOrBefore(Long.MAX_VALUE);
      Map<String, Object> f = new LinkedHashMap<>();
      f.put("new_checkpoint", ledger != null && ledger.entries().size() > before);
      f.put("resume_will_use", latest.map(e -> e.usable().toString()).orElse(null));
      f.put("resume_step", latest.map(CheckpointLedger.Entry::step).orElse(null));
      f.put("trainer_killed", stop.killed());
      f.put("exit_code", RunOutcome.REQUEUE.exitCode());
      f.put("result", "state saved; continue with: stepwarden run --resume " + dir.root());
      audit.append("preempted", f);
      return result(RunOutcome.REQUEUE, "pre-empted (" + why + "); continue with run --resume");
    }
  }

  private void sendSignal(String signal, long pid) {
    try {
      Process p = new ProcessBuilder("kill", "-s", signal, Long.toString(pid))
          .redirectErrorStream(true).redirectOutput(ProcessBuilder.Redirect.DISCARD).start();
      p.waitFor(5, TimeUnit.SECONDS);
    } catch (IOException e) {
      say("could not send " + signal + " to the trainer: " + e.getMessage());
    } catch (InterruptedException e) {
      Thread.currentThread().interrupt();
    }
  }

  /** The run's exit code; an interruption by SIGTERM ends with 143 (128 + 15), as a shell says. */
  private int exitCode(RunOutcome outcome) {
    String by = interruptedBy;
    return outcome == RunOutcome.INTERRUPTED && by != null && by.contains("TERM")
        && !by.contains("INT") ? 143 : outcome.exitCode();
  }

  private Result result(RunOutcome outcome, String reason) throws IOException {
    Optional<CheckpointLedger.Entry> best = ledger == null ? Optional.empty() : ledger.best();
    Map<String, Object> f = new LinkedHashMap<>();
    f.put("outcome", outcome.name().toLowerCase(Locale.ROOT).replace('_', '-'));
    f.put("exit_code", exitCode(outcome));
    f.put("reason", reason);
    f.put("interventions", interventions);
    f.put("final_learning_rate", engine.rate());
    f.put("best_validation", Double.isNaN(engine.bestValidation()) ? null
        : engine.bestValidation());
    f.put("best_validation_step", engine.bestValidationStep());
    f.put("best_checkpoint", best.map(e -> e.usable().toString()).orElse(null));
    f.put("best_checkpoint_step", best.map(CheckpointLedger.Entry::step).orElse(null));
    f.put("best_checkpoint_original", best.map(e -> e.path().toString()).orElse(null));
    f.put("lines", intake.lines());
    f.put("metric_lines", intake.metricLines());
    f.put("ignored_lines", intake.ignoredLines());
    f.put("oversized_lines", intake.oversizedLines()
        + (trainer == null ? 0 : trainer.oversizedLines()));
    boolean suspended = outcome == RunOutcome.REQUEUE;
    audit.append(suspended ? "run-suspended" : "run-end", f);
    saveState(!suspended, outcome.name().toLowerCase(Locale.ROOT).replace('_', '-'));
    Result r = new Result(outcome, reason, dir.root(), audit.path(), interventions, engine.rate(),
        best, engine.bestValidation(), engine.bestValidationStep());
    options.observer().onEnd(r);
    return r;
  }

  /**
   * One line of metrics.jsonl. Numbers the trainer printed as valid JSON are copied as printed
   * (they parse back to the same double); only the rest is formatted here. Reuses its buffers.
   */
  private void writeNormalized(int source, Sample s) throws IOException {
    metricsOut.write(s, engine.rate(), intake, source);
  }

  private void flushMetrics() throws IOException {
    if (metricsOut != null) {
      metricsOut.flush();
    }
  }

  private void say(String message) {
    if (!options.quiet()) {
      options.console().println("stepwarden: " + message);
    }
  }

  private void closeQuietly() {
    if (intake != null) {
      intake.close(); // before taking the lock: the followers' callback takes it too
    }
    try {
      synchronized (lock) {
        if (metricsOut != null) {
          metricsOut.close();
        }
        if (audit != null) {
          audit.close();
        }
      }
    } catch (IOException e) {
      options.console().println("stepwarden: " + e.getMessage());
    }
    try {
      if (dir != null) {
        dir.release(); // last: the run's files are complete before another supervisor may come
      }
    } catch (IOException e) {
      options.console().println("stepwarden: " + e.getMessage());
    }
  }
}
