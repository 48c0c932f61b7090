package dev.stepwarden.supervise;

import dev.stepwarden.audit.AuditLog;
import dev.stepwarden.audit.AuditRecord;
import dev.stepwarden.engine.Decision;
import dev.stepwarden.engine.GuardEngine;
import dev.stepwarden.metrics.MetricsIntake;
import dev.stepwarden.metrics.MetricsSources;
import dev.stepwarden.metrics.ReadPlan;
import dev.stepwarden.metrics.Sample;
import dev.stepwarden.process.LineBatch;
import java.io.IOException;
import java.nio.file.Path;
import java.time.Clock;
import java.time.Duration;
import java.util.ArrayDeque;
import java.util.List;
import java.util.Optional;
import java.util.function.Consumer;
import java.util.regex.Pattern;

/**
 * The path one metric line takes: intake (parse, step axis) -> normalized writer
 * ({@code metrics.jsonl}) -> guards -> the coordinator's {@link Steps}. Every line carries the
 * generation (launch) that printed it; once a generation's follow-up is decided
 * ({@link #endGeneration}) its remaining lines are still written but never judged again, and no
 * confirmation or watchdog acts on them.
 *
 * <p>Observer seam: every sample, judged or not, goes to the {@link RunObserver} (telemetry, a
 * live status line, runtime warnings) after it was written and judged. Calls arrive under the
 * run's lock, on a pump or follower thread.
 *
 * <p>Not thread-safe by itself: every method is called under the run's lock (the pump and file
 * follower callbacks take it here).
 */
final class SamplePath {
  private static final Duration FOLLOW_INTERVAL = Duration.ofMillis(100);
  private static final int MISSING_KEY_WARNING_AFTER = 1_000;
  private static final int STDERR_TAIL = 20;
  private static final Pattern OOM = Pattern.compile(
      "(?i)(out of memory|OutOfMemoryError|CUDA error: out of memory|MemoryError|Killed)");

  /** What the coordinator does with what the path found; called under the run's lock. */
  interface Steps {
    /** A reading of the live generation (steering confirms from it). */
    void reading(MetricsIntake.Reading r, long now) throws IOException;

    /** A validation value arrived: the trainer typically saves right after it evaluates. */
    void validationArrived();

    /** A guard fired on the live generation. */
    void decided(Decision d) throws IOException;

    /** The run directory failed while writing. */
    void failed(IOException e);
  }

  /** While the rate probe runs, lines are the probe's, not the guards'. */
  interface ProbeLines {
    void line(int source, boolean stderr, String line, long now);
  }

  private final Object lock;
  private final Clock clock;
  private final MetricsSources intake;
  private final int[] stdoutSources;
  private final int[] stderrSources;
  private final NormalizedWriter.Printed[] printed;
  private final NormalizedWriter out;
  private final AuditLog audit;
  private final RunObserver observer;
  private final Consumer<String> warn;
  private final ArrayDeque<String> recentStderr = new ArrayDeque<>();
  private GuardEngine engine;
  private Steps steps;
  private ProbeLines probe;
  private boolean closed;

  private int generation;
  private int endedGeneration;
  private long lastMetricMillis;
  private boolean metricSinceLaunch;
  private long currentStep = -1;
  private double lastTrain = Double.NaN;
  private double lastValidation = Double.NaN;
  private boolean missingWarned;

  SamplePath(Object lock, Clock clock, ReadPlan plan, NormalizedWriter out, AuditLog audit,
      RunObserver observer, Consumer<String> warn) {
    this.lock = lock;
    this.clock = clock;
    this.intake = new MetricsSources(plan);
    this.stdoutSources = intake.sourcesOf(ReadPlan.Source.STDOUT);
    this.stderrSources = intake.sourcesOf(ReadPlan.Source.STDERR);
    int n = intake.intakes().size();
    this.printed = new NormalizedWriter.Printed[n];
    for (int i = 0; i < n; i++) {
      printed[i] = printedOf(intake, i);
    }
    this.out = out;
    this.audit = audit;
    this.observer = observer;
    this.warn = warn;
    this.lastMetricMillis = clock.millis();
  }

  /** The text a source printed for each series, as the writer reads it. */
  static NormalizedWriter.Printed printedOf(MetricsSources sources, int source) {
    return new NormalizedWriter.Printed() {
      @Override
      public int length(String series) {
        return sources.printedLength(source, series);
      }

      @Override
      public void copy(String series, byte[] to, int at) {
        sources.copyPrinted(source, series, to, at);
      }
    };
  }

  /** Starts following the plan's files; their lines belong to the generation live when read. */
  void follow(Path workdir, Steps to) {
    this.steps = to;
    intake.follow(workdir, FOLLOW_INTERVAL, (source, line, cut) -> {
      synchronized (lock) {
        if (closed) {
          return;
        }
        long now = clock.millis();
        if (probe != null) {
          probe.line(source, false, line, now);
          return;
        }
        accept(source, intake.accept(source, line, now, cut), now, generation);
      }
    });
  }

  void engine(GuardEngine e) {
    this.engine = e;
  }

  /** Routes lines to the rate probe until {@code null} is given. */
  void probe(ProbeLines p) {
    this.probe = p;
  }

  // ---- generations ----

  /** A new launch begins: returns its generation; the watchdog waits for its first metric. */
  int beginGeneration() {
    metricSinceLaunch = false;
    lastMetricMillis = clock.millis();
    return ++generation;
  }

  /** The live generation's follow-up is decided: its lines are written, never judged again. */
  void endGeneration() {
    endedGeneration = generation;
  }

  /** Whether the live generation still drives decisions. */
  boolean live() {
    return generation > endedGeneration;
  }

  // ---- the lines ----

  /** The lines of one pump read, under one lock acquisition and one clock read. */
  void onLines(int gen, boolean stderr, LineBatch lines) {
    synchronized (lock) {
      if (closed || gen != generation) {
        return; // a line of a launch already replaced: it has nothing left to say
      }
      long now = clock.millis();
      if (probe != null) {
        for (int k = 0; k < lines.size() && !closed; k++) {
          probe.line(-1, stderr, lines.text(k), now);
        }
        return;
      }
      int[] sources = stderr ? stderrSources : stdoutSources;
      for (int k = 0; k < lines.size() && !closed; k++) {
        if (stderr) {
          rememberStderr(lines.text(k));
        }
        for (int i : sources) {
          accept(i, intake.accept(i, lines.bytes(), lines.offset(k), lines.length(k), now,
              lines.cut(k)), now, gen);
        }
      }
    }
  }

  private void accept(int source, MetricsIntake.Reading r, long now, int gen) {
    try {
      take(source, r, now, gen);
    } catch (IOException e) {
      closed = true;
      steps.failed(e);
    }
  }

  private void take(int source, MetricsIntake.Reading r, long now, int gen) throws IOException {
    if (r == null) {
      warnMissingKeys();
      return;
    }
    boolean judge = gen == generation && gen > endedGeneration;
    if (judge) {
      steps.reading(r, now);
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
      steps.validationArrived();
    }
    out.write(s, engine.rate(), printed[source]);
    warnMissingKeys();
    // An ended generation's lines are written, never judged: its follow-up is already decided.
    Optional<Decision> d = judge ? engine.onSample(s) : Optional.empty();
    if (observer != RunObserver.NONE) {
      observer.onSample(s, engine.rate());
      observer.onLines(intake.lines(), intake.metricLines(), intake.ignoredLines());
    }
    if (d.isPresent()) {
      observer.onDecision(d.get());
      steps.decided(d.get());
    }
  }

  private void rememberStderr(String line) {
    if (recentStderr.size() == STDERR_TAIL) {
      recentStderr.removeFirst();
    }
    recentStderr.addLast(line.length() > 500 ? line.substring(0, 500) : line);
  }

  private void warnMissingKeys() throws IOException {
    if (missingWarned) {
      return;
    }
    // the sources decide when: after two epochs of a source that prints epochs, else 1,000 lines
    Optional<String> msg = intake.missingKeysWarning(MISSING_KEY_WARNING_AFTER);
    if (msg.isPresent()) {
      missingWarned = true; // the sources give their warning at most once
      audit.append(new AuditRecord.Warning(intake.lines(), msg.get()));
      warn.accept(msg.get());
      observer.onWarning(msg.get());
    }
  }

  // ---- what the coordinator reads ----

  /** The axis goes on after a checkpoint of {@code step} (a relaunch resumes it). */
  void continueAfter(long step) {
    intake.continueAfter(step);
    currentStep = step;
  }

  /** Sets the step the run stands at (a relaunch from scratch starts before step 0). */
  void standAt(long step) {
    currentStep = step;
  }

  long currentStep() {
    return currentStep;
  }

  long lastStep() {
    return intake.lastStep();
  }

  double lastTrain() {
    return lastTrain;
  }

  double lastValidation() {
    return lastValidation;
  }

  /** No non-finite value among the latest series values. */
  boolean healthy() {
    return (Double.isNaN(lastTrain) || Double.isFinite(lastTrain))
        && (Double.isNaN(lastValidation) || Double.isFinite(lastValidation));
  }

  long lastMetricMillis() {
    return lastMetricMillis;
  }

  /** Restarts the silence clock (after a silence was acted on). */
  void quietSince(long now) {
    lastMetricMillis = now;
  }

  boolean metricSinceLaunch() {
    return metricSinceLaunch;
  }

  /** The latest stderr line that says the trainer ran out of memory, or null. */
  String outOfMemoryLine() {
    return recentStderr.stream().filter(l -> OOM.matcher(l).find()).findFirst().orElse(null);
  }

  List<String> stderrTail() {
    return List.copyOf(recentStderr);
  }

  MetricsSources intake() {
    return intake;
  }

  void flush() throws IOException {
    out.flush();
  }

  /** Stops taking lines; the followers end first (their callback takes the lock). */
  void close() throws IOException {
    intake.close();
    synchronized (lock) {
      closed = true;
      out.close();
    }
  }
}
