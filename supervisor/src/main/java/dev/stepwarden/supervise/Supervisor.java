package dev.stepwarden.supervise;

import dev.stepwarden.audit.AuditLog;
import dev.stepwarden.audit.AuditRecord;
import dev.stepwarden.checkpoints.CheckpointLedger;
import dev.stepwarden.engine.Decision;
import dev.stepwarden.engine.GuardEngine;
import dev.stepwarden.metrics.MetricsIntake;
import dev.stepwarden.process.LineBatch;
import dev.stepwarden.process.LineBatchListener;
import dev.stepwarden.process.StopResult;
import dev.stepwarden.process.TrainerProcess;
import dev.stepwarden.process.TrainerStream;
import dev.stepwarden.rules.GuardFile;
import dev.stepwarden.rundir.RunBusyException;
import dev.stepwarden.rundir.RunLock;
import java.io.IOException;
import java.nio.file.Files;
import java.nio.file.Path;
import java.time.Clock;
import java.time.Duration;
import java.util.LinkedHashMap;
import java.util.Locale;
import java.util.Map;
import java.util.Optional;
import java.util.OptionalInt;
import java.util.concurrent.BlockingQueue;
import java.util.concurrent.CountDownLatch;
import java.util.concurrent.LinkedBlockingQueue;
import java.util.concurrent.TimeUnit;
import tools.jackson.databind.JsonNode;

/**
 * Supervises one training run from launch to the morning: a small coordinator over its parts.
 * {@link SamplePath} takes each metric line (intake -> {@code metrics.jsonl} -> guards),
 * {@link Steering} publishes rates and confirms them, {@link CheckpointKeeper} keeps the vault and
 * chooses where a relaunch resumes, {@link Launcher} starts a trainer, {@link Resumption} saves
 * and reads {@code state.json}, {@link PeriodicWork} is the tick, {@link PreemptionStop} the
 * pre-emption. What is decided goes to disk (audit record, then state) before it is done.
 *
 * <p>Generations: each launch is one, with its own rate (published before the launch and
 * confirmed from its lines) and its own lines. A decision that ends a generation (a rewind, a
 * restart, a stop, giving up, a hang, a crash) is followed by exactly one follow-up: the
 * generation's remaining lines are still written but never judged, and the follow-up is saved as
 * planned before it is carried out. After an ending no trainer is launched.
 *
 * <p>Threads: pump threads parse and decide under one lock and carry out only what never blocks
 * on the trainer (writing the control file). Anything that stops the trainer goes through a
 * queue to the supervising thread, since stopping waits for the pumps to drain and must never
 * run on a pump thread. The supervising thread also runs the {@link PeriodicWork}. Wall time comes
 * from the injected {@link Clock}.
 */
public final class Supervisor {
  /** How long a trainer that exited may leave a child holding its output before it is stopped. */
  private static final Duration LEFTOVER_WAIT = Duration.ofSeconds(2);

  /** What the run came to. */
  public record Result(RunOutcome outcome, String reason, Path runDir, Path auditLog,
      int interventions, double finalRate, Optional<CheckpointLedger.Entry> bestCheckpoint,
      double bestValidation, long bestValidationStep) {}

  private static final Request SCAN = new Request.Scan();
  private static final Request WAKE = new Request.Wake();

  private GuardFile rules;
  private final RunOptions options;
  private final Clock clock;
  private final Object lock = new Object();
  private final BlockingQueue<Request> requests = new LinkedBlockingQueue<>();
  /** Counted down by {@link #interrupt}: a back-off waits on it, not on a plain sleep. */
  private final CountDownLatch stopRequested = new CountDownLatch(1);

  private RunDirectory dir;
  private Path workdir;
  private AuditLog audit;
  private GuardEngine engine;
  private SamplePath path;
  private Steering steering;
  private CheckpointKeeper keeper;
  private RunParts parts;
  private PeriodicWork periodic;

  private volatile TrainerProcess trainer;
  private volatile boolean finished;
  private volatile boolean interrupted;
  /** The signal that interrupted the run (SIGTERM ends with 143, anything else with 130). */
  private volatile String interruptedBy;
  private int attempt;
  private int crashRestarts;
  private int interventions;
  private String resumeFrom = "";
  /** The follow-up decided for the live generation, saved so a resume carries it out. */
  private Resumption.Planned planned;
  private JsonNode resumed;
  /** The probe's launch printed no training loss: the run ends instead of guessing. */
  private boolean probeReadNothing;
  /** When the trainer was first seen exited while its output still flowed (0: not yet). */
  private long exitSeenNanos;

  public Supervisor(GuardFile rules, RunOptions options) {
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
  public static Supervisor resume(Path runDir, GuardFile rules, RunOptions options)
      throws IOException {
    return resume(runDir, rules, options, Map.of());
  }

  /**
   * As {@link #resume(Path, GuardFile, RunOptions)}, with {@code env} laid over the saved
   * environment (a null value removes a variable): what belongs to where the run continues,
   * not to the run, such as the GPUs of the queue slot that resumes it.
   */
  public static Supervisor resume(Path runDir, GuardFile rules, RunOptions options,
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
    Supervisor s = new Supervisor(g, new RunOptions(root, options.quiet(), options.clock(),
        options.console(), options.observer(), options.preemption(), options.copyVault()));
    s.resumed = state;
    return s;
  }

  /** Runs the night; returns when the trainer finished, a guard ended it, or it was stopped. */
  public Result run() throws IOException, InterruptedException {
    try {
      if (resumed == null) {
        prepare();
        if (rules.probe().isPresent() && !interrupted) {
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
        synchronized (lock) {
          return result(RunOutcome.INTERRUPTED, "interrupted by a signal before the run's"
              + " trainer was launched");
        }
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
      launch(resumed == null ? "start" : "resume", planned == null ? 0 : planned.skipBatches(),
          null);
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

  private void failSafe(IOException cause) {
    TrainerProcess t = trainer;
    StopResult stop = t == null ? null : t.stop();
    try {
      synchronized (lock) {
        audit.append(new AuditRecord.SupervisorFailure(cause.getMessage(),
            stop != null && stop.wasAlive(), "the supervisor cannot write its run directory;"
            + " the trainer was stopped safely and its checkpoints are untouched"));
      }
    } catch (IOException again) {
      options.console().println("stepwarden: the audit log cannot record the failure either: "
          + again.getMessage());
    }
  }

  /**
   * Called on SIGINT/SIGTERM: stops the trainer's tree (TERM, grace, KILL) and writes the audit
   * record; the live generation is judged no more. At start-up or during a back-off the run ends
   * without launching a trainer. Does nothing when the run has already ended.
   */
  public void interrupt(String signal) {
    if (finished) {
      return;
    }
    // Record first, then stop: the supervising thread closes the log once it sees the flag.
    try {
      synchronized (lock) {
        if (path != null) { // the parts are open (they open together, under no signal)
          path.endGeneration();
          audit.append(new AuditRecord.Interrupted(signal, path.lastStep(), engine.rate(),
              "stopping the trainer's process group (TERM, grace, KILL)"));
          path.flush();
        }
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
        if (path != null) {
          audit.append(new AuditRecord.Hangup(path.lastStep()));
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

  // ---- start ----

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
    engine = new GuardEngine(rules);
    openParts(0);
    keeper.baseline(); // an earlier run's files: their step is unknown
    keeper.notBeforeNow(); // nor is a file older than the first launch this run's
    audit.append(new AuditRecord.RunStart(rules.run().name(), rules.run().command(),
        workdir.toString(), rules.source() == null ? null : rules.source().toString(),
        dir.root().toString(), engine.rate(),
        rules.steer().by().name().toLowerCase(Locale.ROOT).replace('_', '-'),
        rules.guards().stream().map(GuardFile.Guard::name).toList()));
  }

  private void prepareResume() throws IOException {
    JsonNode st = resumed;
    dir = RunDirectory.resumed(options.runDir());
    workdir = rules.run().workdir() == null ? Path.of("").toAbsolutePath()
        : rules.run().workdir().toAbsolutePath();
    long tornBytes = Resumption.cutTornAuditTail(
        dir.privateFile(RunDirectory.AUDIT)); // never through a link
    engine = new GuardEngine(rules);
    engine.restore(StateFile.engine(st.path("engine")));
    openParts(st.path("control_revision").asLong());
    Resumption.Continued c = Resumption.carryOn(st, keeper, audit, engine, tornBytes);
    attempt = c.counters().attempt();
    crashRestarts = c.counters().crashRestarts();
    interventions = c.counters().interventions();
    planned = c.planned();
    standAt(c.target());
  }

  /** Opens the run's parts over the run directory; followed files feed lines from now on. */
  private void openParts(long controlRevision) throws IOException {
    synchronized (lock) { // a signal handler sees all of them or none
      parts = RunParts.open(dir, workdir, rules, options, lock, engine, controlRevision,
          new Reactions(), this::trainerPid, this::say);
      audit = parts.audit();
      steering = parts.steering();
      keeper = parts.keeper();
      periodic = parts.periodic();
      path = parts.path();
    }
  }

  /** What the parts hand back: readings, decisions, time-outs; under the lock. */
  private final class Reactions implements RunParts.Reactions {
    @Override
    public void reading(MetricsIntake.Reading r, long now) throws IOException {
      if (steering.onReading(r, now)) {
        Supervisor.this.saveState(false, null);
      }
    }

    @Override
    public void validationArrived() {
      // Scanning hashes new checkpoints, which can take seconds for big ones: the supervising
      // thread does it, so the pump thread goes on draining the trainer's output.
      requests.offer(SCAN);
    }

    @Override
    public void decided(Decision d) throws IOException {
      act(d);
    }

    @Override
    public void failed(IOException e) {
      requests.add(new Request.End(null, null));
      options.console().println("stepwarden: " + e.getMessage());
    }

    @Override
    public void saveState() throws IOException {
      Supervisor.this.saveState(false, null);
    }

    @Override
    public void unconfirmed(Steering.Unconfirmed u) throws IOException {
      say("the trainer did not confirm rate " + u.rate() + " within "
          + rules.steer().confirmWithin().toSeconds() + " s (it reports "
          + (Double.isNaN(u.reported()) ? "no rate" : Double.toString(u.reported())) + ")");
      if (u.restart()) {
        relaunchLater(new Request.Relaunch("change not confirmed", u.decisionSeq(),
            path.lastStep(), 0));
      } else {
        Supervisor.this.saveState(false, null);
      }
    }

    @Override
    public void hung() throws IOException {
      if (crashRestarts >= rules.limits().crashRestarts()) {
        endGeneration(null);
        requests.add(new Request.End(null, null));
      } else {
        crashRestarts++;
        relaunchLater(new Request.Relaunch("hang", null, path.lastStep(), 0));
      }
    }
  }

  /** The rate probe's throw-away launches; a range it finds sets the starting rate. */
  private void probe(GuardFile.Probe p) throws IOException, InterruptedException {
    double found = ProbeRun.run(p, rules, lock, parts, () -> interrupted, this::say,
        (reason, rate, revision) -> {
          attempt++;
          start(reason, rate, revision, 0);
          return trainer;
        });
    probeReadNothing = found == ProbeRun.READ_NOTHING;
    if (!Double.isNaN(found) && !probeReadNothing) {
      synchronized (lock) {
        GuardFile.Run run = rules.run();
        rules = rules.withRun(new GuardFile.Run(run.name(), run.command(), found, run.workdir(),
            run.env(), run.stopGrace()));
        engine = new GuardEngine(rules);
        path.engine(engine);
      }
    }
  }

  // ---- launches ----

  /**
   * Starts a generation: publishes its rate to the control file (forced to disk) first, so that
   * whatever the trainer reads at its start is the rate of this launch, and the same rate goes
   * into {@code {learning_rate}}; then expects the trainer to confirm it.
   *
   * @param decisionSeq the decision this launch carries out, if any
   */
  private void launch(String reason, int skipBatches, Long decisionSeq) throws IOException {
    synchronized (lock) {
      attempt++;
      engine.beginGeneration(Math.max(path.currentStep(), 0), resumeFrom.isEmpty());
      double rate = engine.rate();
      long revision = steering.beforeLaunch(rate, attempt, path.currentStep(), decisionSeq,
          "change not confirmed".equals(reason));
      start(reason, rate, revision, skipBatches);
    }
  }

  private void start(String reason, double rate, long revision, int skipBatches)
      throws IOException {
    int gen = path.beginGeneration();
    Launcher.Launched l = parts.launcher().start(rate, resumeFrom, skipBatches, attempt,
        new LineBatchListener() {
          @Override
          public void onLines(TrainerStream stream, LineBatch lines) {
            path.onLines(gen, stream == TrainerStream.STDERR, lines);
          }
        });
    trainer = l.trainer();
    trainer.whenDrained(() -> requests.offer(WAKE));
    audit.append(new AuditRecord.Launch(attempt, reason, trainer.pid(), l.argv(), rate,
        revision, resumeFrom, skipBatches));
    planned = null; // carried out: a resume from here on continues this launch
    saveState(false, null);
    options.observer().onLaunch(attempt, reason);
  }

  /** Stands the run at the target's step (or before step 0 when there is none). */
  private void standAt(CheckpointKeeper.Target t) {
    resumeFrom = t.resumeFrom();
    if (t.entry().isPresent()) {
      path.continueAfter(t.entry().get().step());
    } else {
      path.standAt(-1);
    }
  }

  private void relaunch(Request.Relaunch rl) throws IOException {
    StopResult stop = trainer.stop();
    synchronized (lock) {
      path.endGeneration();
      keeper.record(keeper.scan(path.currentStep(), path.lastTrain(), path.lastValidation(),
          false, clock.millis(), false));
      CheckpointKeeper.Target t = keeper.resumeAt(rl.targetStep());
      Optional<CheckpointLedger.Entry> e = t.entry();
      standAt(t);
      audit.append(new AuditRecord.Relaunched(rl.reason(), rl.decisionSeq(), stop.killed(),
          e.isPresent() ? resumeFrom : null, e.map(CheckpointLedger.Entry::step).orElse(null),
          e.map(x -> x.path().toString()).orElse(null),
          e.map(CheckpointLedger.Entry::sha256).orElse(null), rl.targetStep(), t.abandoned(),
          engine.rate(), e.isPresent() ? "restarting from the checkpoint of step "
              + e.get().step() : "restarting from scratch (no healthy checkpoint before step "
              + rl.targetStep() + ")"));
      if (interrupted) {
        return; // the loop ends the run; no trainer is launched after a stop signal
      }
      launch(rl.reason(), rl.skipBatches(), rl.decisionSeq());
    }
  }

  // ---- decisions ----

  private void act(Decision d) throws IOException {
    interventions++;
    long seq = audit.append(Decisions.record(d));
    saveState(false, null);
    say("step " + d.step() + ": guard '" + d.guard() + "' fired: " + d.evidence().summary()
        + (d.changesRate() ? "; rate " + d.rateBefore() + " -> " + d.rateAfter() : ""));
    if (d.ending() != Decision.Ending.CONTINUE) {
      endGeneration(null);
      requests.add(new Request.End(d, seq));
    } else if (d.rewinds()) {
      relaunchLater(new Request.Relaunch("rewind", seq, Decisions.onsetStep(d),
          d.skipBatches()));
    } else if (d.changesRate() && rules.steer().by() == GuardFile.Steer.Method.RESTART) {
      relaunchLater(new Request.Relaunch("new rate by restart", seq, path.lastStep(), 0));
    } else if (d.changesRate()) {
      steering.liveChange(d, seq);
      saveState(false, null);
    }
  }

  /** Marks the live generation as ended: exactly one follow-up (already queued) comes next. */
  private void endGeneration(Resumption.Planned plan) throws IOException {
    path.endGeneration();
    steering.forget();
    planned = plan;
    saveState(false, null);
  }

  /** Ends the live generation with a relaunch: state first (a resume carries it out), then it. */
  private void relaunchLater(Request.Relaunch rl) throws IOException {
    endGeneration(new Resumption.Planned(rl.reason(), rl.targetStep(), rl.skipBatches()));
    requests.add(rl);
  }

  // ---- the supervising thread ----

  private Result loop() throws IOException, InterruptedException {
    // The periodic work runs once per tick however many requests arrive: a trainer reporting
    // validation more often than the tick must not starve it (each value queues a scan).
    long tick = PeriodicWork.TICK.toNanos();
    long nextTick = System.nanoTime() + tick;
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
        periodic.scan(clock.millis());
      }
      OptionalInt exit = trainer.waitFor(Duration.ZERO);
      if (exit.isEmpty() && leftoversHoldTheOutput()) {
        continue; // stopped them: the output has drained now
      }
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
        periodic.run();
        nextTick = System.nanoTime() + tick;
      }
    }
  }

  /**
   * The trainer's own exit decides: when it has exited but a child still holds its output open,
   * the rest of its tree is stopped after a short wait (and the exit is handled as the trainer's).
   */
  private boolean leftoversHoldTheOutput() {
    OptionalInt own = trainer.exitedItself();
    if (own.isEmpty()) {
      exitSeenNanos = 0;
      return false;
    }
    if (exitSeenNanos == 0) {
      exitSeenNanos = System.nanoTime();
    }
    if (System.nanoTime() - exitSeenNanos < LEFTOVER_WAIT.toNanos()) {
      return false;
    }
    say("the trainer exited with code " + own.getAsInt() + " but a process it started still"
        + " holds its output; stopping what is left of its tree");
    trainer.stop();
    exitSeenNanos = 0;
    return true;
  }

  private Result exited(int code) throws IOException, InterruptedException {
    trainer.stop(); // nothing of the tree outlives its trainer (a setsid() worker included)
    synchronized (lock) {
      path.flush();
      // A clean exit means nothing is still writing; after a crash a file may be half-written.
      periodic.scanNow(code == 0);
      if (code == 0) {
        audit.append(new AuditRecord.TrainerExit(code, path.lastStep()));
        return result(RunOutcome.FINISHED, "the trainer finished normally");
      }
      String oom = path.outOfMemoryLine();
      audit.append(new AuditRecord.Crash(code, path.lastStep(), oom, code == 137
          ? "killed by signal 9; possibly the kernel's out-of-memory killer" : null,
          path.stderrTail()));
      if (crashRestarts >= rules.limits().crashRestarts()) {
        endGeneration(null);
        return result(RunOutcome.GAVE_UP, "the trainer exited with code " + code
            + (oom != null ? " (out of memory)" : "") + " and the crash-restart budget ("
            + rules.limits().crashRestarts() + ") is spent");
      }
      crashRestarts++;
      // The count and the planned restart reach state.json before the back-off: a supervisor
      // killed while waiting resumes with the crash counted.
      endGeneration(new Resumption.Planned("crash", path.lastStep(), 0));
    }
    long backoff = Math.min(rules.limits().crashBackoff().toMillis() << (crashRestarts - 1),
        300_000L);
    say("trainer exited with code " + code + "; restart " + crashRestarts + " of "
        + rules.limits().crashRestarts() + " in " + backoff + " ms");
    if (!stopRequested.await(backoff, TimeUnit.MILLISECONDS)) {
      relaunch(new Request.Relaunch("crash", null, path.lastStep(), 0));
    } // else: a stop signal during the back-off; the loop ends the run, nothing is launched
    return null;
  }

  private Result end(Decision d) throws IOException {
    StopResult stop = trainer.stop();
    synchronized (lock) {
      path.endGeneration();
      path.flush();
      periodic.scanNow(!stop.killed());
      RunOutcome outcome = d != null && d.ending() == Decision.Ending.STOP_EARLY
          ? RunOutcome.STOPPED_EARLY : RunOutcome.GAVE_UP;
      String reason = d == null ? "the supervisor stopped the run (see the previous record)"
          : "guard '" + d.guard() + "': " + d.evidence().summary()
              + (d.note().isEmpty() ? "" : " (" + d.note() + ")");
      audit.append(new AuditRecord.Ended(outcome == RunOutcome.STOPPED_EARLY ? "stopped early"
          : "gave up", stop.killed()));
      return result(outcome, reason);
    }
  }

  private Result preempted(String why) throws IOException, InterruptedException {
    PreemptionStop.run(options.preemption(), why, trainer, lock, parts, engine.rate(), dir.root(),
        this::say);
    synchronized (lock) {
      return result(RunOutcome.REQUEUE, "pre-empted (" + why + "); continue with run --resume");
    }
  }

  // ---- ending ----

  /** The run's exit code; an interruption by SIGTERM ends with 143 (128 + 15), as a shell says. */
  private int exitCode(RunOutcome outcome) {
    String by = interruptedBy;
    return outcome == RunOutcome.INTERRUPTED && by != null && by.contains("TERM")
        && !by.contains("INT") ? 143 : outcome.exitCode();
  }

  private Result result(RunOutcome outcome, String reason) throws IOException {
    Optional<CheckpointLedger.Entry> best = keeper.best();
    boolean suspended = outcome == RunOutcome.REQUEUE;
    double bestValidation = engine.bestValidation();
    audit.append(new AuditRecord.RunEnd(suspended,
        outcome.name().toLowerCase(Locale.ROOT).replace('_', '-'), exitCode(outcome), reason,
        interventions, engine.rate(), Double.isNaN(bestValidation) ? null : bestValidation,
        engine.bestValidationStep(), best.map(e -> e.usable().toString()).orElse(null),
        best.map(CheckpointLedger.Entry::step).orElse(null),
        best.map(e -> e.path().toString()).orElse(null), path.intake().lines(),
        path.intake().metricLines(), path.intake().ignoredLines(),
        path.intake().oversizedLines() + (trainer == null ? 0 : trainer.oversizedLines())));
    planned = null;
    saveState(!suspended, outcome.name().toLowerCase(Locale.ROOT).replace('_', '-'));
    Result r = new Result(outcome, reason, dir.root(), audit.path(), interventions, engine.rate(),
        best, bestValidation, engine.bestValidationStep());
    options.observer().onEnd(r);
    return r;
  }

  /** Replaces state.json; called under the lock after anything a resume needs to know. */
  private void saveState(boolean ended, String outcome) throws IOException {
    Resumption.save(dir.file(RunDirectory.STATE), new Resumption.State(ended, outcome,
        clock.instant(), rules.run(), engine, new Resumption.Counters(attempt, crashRestarts,
            interventions), steering.revision(), path.currentStep(), resumeFrom, planned,
        keeper.ledger()));
    periodic.stateSaved();
  }

  /** The live trainer's pid for the checkpoint writer probe; -1 between launches. */
  private long trainerPid() {
    TrainerProcess t = trainer;
    return t == null ? -1 : t.pid();
  }

  private void say(String message) {
    if (!options.quiet()) {
      options.console().println("stepwarden: " + message);
    }
  }

  private void closeQuietly() {
    try {
      if (path != null) {
        path.close(); // the followers end before it takes the lock
      }
      synchronized (lock) {
        if (audit != null) {
          audit.close();
        }
      }
    } catch (IOException e) {
      options.console().println("stepwarden: " + e.getMessage());
    }
    try {
      if (keeper != null) {
        keeper.close(); // this run's glob is no longer claimed among the live runs
      }
      if (dir != null) {
        dir.release(); // last: the run's files are complete before another supervisor may come
      }
    } catch (IOException e) {
      options.console().println("stepwarden: " + e.getMessage());
    }
  }
}
