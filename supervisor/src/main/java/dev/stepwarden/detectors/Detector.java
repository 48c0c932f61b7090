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

  /** Forgets the history: after a rate change or a rewind the series starts a new regime. */
  void reset();
}
