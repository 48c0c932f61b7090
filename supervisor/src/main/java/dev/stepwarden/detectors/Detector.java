package dev.stepwarden.detectors;

import java.util.Optional;

/**
 * A detector watches one series and says, on each new point, whether its condition holds now.
 *
 * <p>Detectors keep only fixed-size windows (memory stays flat over millions of points) and are
 * deterministic: the same points give the same answers, which replay relies on.
 */
public interface Detector {
  /** Feeds the next point of the watched series; returns evidence when the condition holds. */
  Optional<Evidence> offer(long step, double value);

  /** Forgets the history: a new generation from scratch, or the series starts a new regime. */
  void reset();

  /**
   * A new generation resumes a checkpoint of {@code step}: a detector whose judgement rests on
   * a reference level restores the reference it had then; by default it forgets its window.
   */
  default void rewindTo(long step) {
    reset();
  }

  /**
   * The rate changed within the launch (or a rewind was decided): the series starts a new regime,
   * so a detector of trends forgets its window (the default); a detector that judges against the
   * launch's own level keeps that level, since judging against a single new batch would be noise.
   */
  default void rateChanged() {
    reset();
  }
}
