package dev.stepwarden.supervise;

import dev.stepwarden.audit.AuditLog;
import dev.stepwarden.audit.AuditRecord;
import dev.stepwarden.checkpoints.CheckpointLedger;
import dev.stepwarden.rules.GuardFile;
import java.io.IOException;
import java.time.Clock;
import java.time.Duration;
import java.util.List;
import java.util.function.Consumer;

/**
 * The supervising thread's periodic task, run once per tick however many requests arrive: a
 * checkpoint scan, a flush of {@code metrics.jsonl}, a state save while steps advance, and, for
 * a generation whose follow-up is not yet decided, the confirmation time-out and the silence
 * watchdog. Their consequences (a restart, an ending) go back to the coordinator.
 */
final class PeriodicWork {
  /** How often the task runs. */
  static final Duration TICK = Duration.ofMillis(200);
  private static final long STATE_EVERY_MILLIS = 5_000;

  /** What the coordinator does about what the task found; called under the run's lock. */
  interface Consequences {
    void saveState() throws IOException;

    void unconfirmed(Steering.Unconfirmed u) throws IOException;

    /** The trainer was quiet past the limit (already audited): restart or give up. */
    void hung() throws IOException;
  }

  private final Object lock;
  private final Clock clock;
  private final SamplePath path;
  private final CheckpointKeeper keeper;
  private final Steering steering;
  private final GuardFile.Limits limits;
  private final AuditLog audit;
  private final Consumer<String> say;
  private final Consequences then;
  private long stateSavedStep = -1;
  private long stateSavedMillis;

  PeriodicWork(Object lock, Clock clock, SamplePath path, CheckpointKeeper keeper,
      Steering steering, GuardFile.Limits limits, AuditLog audit, Consumer<String> say,
      Consequences then) {
    this.lock = lock;
    this.clock = clock;
    this.path = path;
    this.keeper = keeper;
    this.steering = steering;
    this.limits = limits;
    this.audit = audit;
    this.say = say;
    this.then = then;
  }

  /** One tick. */
  void run() throws IOException {
    long now = clock.millis();
    scan(now);
    synchronized (lock) {
      path.flush();
      if (path.currentStep() != stateSavedStep && now - stateSavedMillis >= STATE_EVERY_MILLIS) {
        then.saveState();
      }
      if (!path.live()) {
        return; // the follow-up is decided: nothing of this generation is judged any more
      }
      var u = steering.checkTimeOut();
      if (u.isPresent()) {
        then.unconfirmed(u.get());
      }
      if (path.live()) {
        watchSilence(now);
      }
    }
  }

  /**
   * Scans without holding the lock while files are hashed, so the pumps keep draining the
   * trainer's pipes; the run's state is read before and the results recorded after, under it.
   */
  void scan(long now) throws IOException {
    long step;
    double train;
    double validation;
    boolean healthy;
    synchronized (lock) {
      step = path.currentStep();
      train = path.lastTrain();
      validation = path.lastValidation();
      healthy = path.healthy();
    }
    List<CheckpointLedger.Entry> fresh = keeper.scan(step, train, validation, healthy, now,
        false);
    synchronized (lock) {
      if (keeper.record(fresh)) {
        then.saveState();
      }
    }
  }

  /** Scans and records under the lock (the trainer is gone or going: nothing to drain). */
  void scanNow(boolean forceSettle) throws IOException {
    if (keeper.record(keeper.scan(path.currentStep(), path.lastTrain(), path.lastValidation(),
        path.healthy(), clock.millis(), forceSettle))) {
      then.saveState();
    }
  }

  /** The state was just saved at the run's current step. */
  void stateSaved() {
    stateSavedStep = path.currentStep();
    stateSavedMillis = clock.millis();
  }

  private void watchSilence(long now) throws IOException {
    boolean started = path.metricSinceLaunch();
    Duration silence = started ? limits.silence() : limits.startupSilence();
    long quiet = now - path.lastMetricMillis();
    if (silence.isZero() || quiet <= silence.toMillis()) {
      return;
    }
    audit.append(new AuditRecord.Silence(quiet, silence.toMillis(), path.lastStep(), !started));
    say.accept((started ? "no metric for " : "no first metric since the launch, ")
        + quiet / 1000 + " s: treating the trainer as hung");
    path.quietSince(now);
    then.hung();
  }
}
