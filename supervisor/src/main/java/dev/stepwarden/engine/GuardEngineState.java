package dev.stepwarden.engine;

import java.util.Map;

/**
 * What a {@link GuardEngine} must carry over when a run is resumed after the supervisor died:
 * the rate, the rewind count, the best validation value and each guard's rest. Detector windows
 * are not kept: after a restart the series starts a new regime, as after any intervention.
 *
 * @param bestValidation NaN when none was seen
 * @param rests guard name to {@code [evaluations, restUntil]}
 */
public record GuardEngineState(double rate, int rewinds, long samples, double bestValidation,
    long bestValidationStep, Map<String, long[]> rests) {
  public GuardEngineState {
    rests = Map.copyOf(rests);
  }
}
