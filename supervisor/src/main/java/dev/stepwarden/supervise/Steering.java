package dev.stepwarden.supervise;

import dev.stepwarden.audit.AuditLog;
import dev.stepwarden.audit.AuditRecord;
import dev.stepwarden.control.ControlFile;
import dev.stepwarden.engine.Decision;
import dev.stepwarden.metrics.MetricsIntake;
import dev.stepwarden.rules.GuardFile;
import java.io.IOException;
import java.time.Clock;
import java.util.Optional;

/**
 * How a rate reaches the trainer and how we know it did: publishing to the control file (before
 * every launch, and for a live change), confirmation from the trainer's own lines (its reported
 * rate or {@code applied_revision}), and the {@code steer.confirm_within} time-out with its
 * fallback. Wall time comes from the {@link Clock}, so tests advance it without a process.
 *
 * <p>A launch's clock starts at its generation's first metric (start-up time, importing a
 * framework say, is not the trainer's to control); a live change's at the moment it is written.
 * Not thread-safe: called under the run's lock.
 */
final class Steering {
  /** A rate the trainer has yet to confirm; {@code sinceMillis} -1: waiting for a first metric. */
  private record Pending(long revision, double rate, long sinceMillis, Long decisionSeq,
      String confirmedFor, boolean afterFallback) {
    Pending startingAt(long now) {
      return new Pending(revision, rate, now, decisionSeq, confirmedFor, afterFallback);
    }
  }

  /**
   * A confirmation time-out: what was recorded and whether a restart follows.
   *
   * @param reported the rate the trainer reports, or NaN when it reports none
   */
  record Unconfirmed(Long decisionSeq, double rate, double reported, boolean restart) {}

  /** Relative tolerance between a reported and a commanded rate (printing rounds). */
  private static final double TOLERANCE = 1e-4;

  private final ControlFile control;
  private final GuardFile.Steer steer;
  private final AuditLog audit;
  private final Clock clock;
  private Pending pending;
  private double reportedRate = Double.NaN;

  Steering(ControlFile control, GuardFile.Steer steer, AuditLog audit, Clock clock) {
    this.control = control;
    this.steer = steer;
    this.audit = audit;
    this.clock = clock;
  }

  /**
   * Publishes a launch's rate (a new revision, forced to disk) before the trainer starts and
   * expects the launch to confirm it.
   *
   * @param afterFallback the launch is itself the restart of an unconfirmed change: a second
   *     time-out is recorded but not restarted again
   * @return the revision written
   */
  long beforeLaunch(double rate, int attempt, long step, Long decisionSeq, boolean afterFallback)
      throws IOException {
    long revision = control.publish(rate, "(launch " + attempt + ")", Math.max(step, 0));
    reportedRate = Double.NaN;
    pending = new Pending(revision, rate, -1, decisionSeq, "launch " + attempt, afterFallback);
    return revision;
  }

  /** Publishes a rate of the rate probe's ramp; the probe's launch is not confirmed. */
  long probeRate(double rate, long step) throws IOException {
    pending = null;
    return control.publish(rate, "(probe)", step);
  }

  /** A live change: writes the control file, records the outcome, waits for confirmation. */
  void liveChange(Decision d, long decisionSeq) throws IOException {
    long revision = control.publish(d.rateAfter(), d.guard(), d.step());
    audit.append(new AuditRecord.RateWritten(decisionSeq, revision, d.rateAfter()));
    pending = new Pending(revision, d.rateAfter(), clock.millis(), decisionSeq, "live change",
        false);
  }

  /** Asks a trainer for a checkpoint now (pre-emption), at an unchanged rate. */
  long requestCheckpoint(double rate, long step) throws IOException {
    return control.requestCheckpoint(rate, "(pre-emption)", step);
  }

  /**
   * One reading of the live generation. Returns true when it confirmed the pending rate (a
   * {@code confirmed} record was written).
   */
  boolean onReading(MetricsIntake.Reading r, long now) throws IOException {
    if (r.hasRate()) {
      reportedRate = r.reportedRate();
    }
    Pending p = pending;
    if (p == null) {
      return false;
    }
    if (p.sinceMillis() < 0 && r.sample() != null) {
      p = p.startingAt(now);
      pending = p;
    }
    boolean byRevision = r.hasRevision() && r.appliedRevision() >= p.revision();
    boolean byRate = r.hasRate()
        && Math.abs(r.reportedRate() - p.rate()) <= TOLERANCE * Math.abs(p.rate());
    if (!byRevision && !byRate) {
      return false;
    }
    audit.append(new AuditRecord.Confirmed(p.decisionSeq(), p.confirmedFor(), p.revision(),
        p.rate(), now - Math.max(0, p.sinceMillis()),
        byRevision ? "applied_revision" : "reported rate"));
    pending = null;
    return true;
  }

  /**
   * The time-out: when the pending rate waited longer than {@code steer.confirm_within}, records
   * {@code not-confirmed} with both rates and says whether {@code steer.unconfirmed} restarts. A
   * restart that was itself the fallback is not repeated, and a launch whose trainer reports no
   * rate at all is not restarted over it (a restart cannot change that).
   */
  Optional<Unconfirmed> checkTimeOut() throws IOException {
    Pending p = pending;
    long now = clock.millis();
    if (p == null || p.sinceMillis() < 0
        || now - p.sinceMillis() <= steer.confirmWithin().toMillis()) {
      return Optional.empty();
    }
    pending = null;
    boolean atLaunch = !"live change".equals(p.confirmedFor());
    boolean restart = steer.restartWhenUnconfirmed() && !p.afterFallback()
        && (!atLaunch || !Double.isNaN(reportedRate));
    audit.append(new AuditRecord.NotConfirmed(p.decisionSeq(), p.confirmedFor(), p.revision(),
        p.rate(), Double.isNaN(reportedRate) ? null : reportedRate, now - p.sinceMillis(),
        restart ? "restart" : "none"));
    return Optional.of(new Unconfirmed(p.decisionSeq(), p.rate(), reportedRate, restart));
  }

  /** The generation ended: nothing of it is confirmed any more. */
  void forget() {
    pending = null;
  }

  /** The rate the live generation last reported (NaN: none yet). */
  double reportedRate() {
    return reportedRate;
  }

  long revision() {
    return control.revision();
  }

  ControlFile control() {
    return control;
  }
}
