package dev.stepwarden.supervise;

import dev.stepwarden.metrics.Sample;
import dev.stepwarden.engine.Decision;

/**
 * Read-only hooks into a supervised run, for telemetry and live views. Called on supervisor
 * threads (pump threads for samples): implementations must be quick and must not block.
 */
public interface RunObserver {
  RunObserver NONE = new RunObserver() {};

  /** A metric sample was taken in; {@code rate} is the rate in force. */
  default void onSample(Sample sample, double rate) {}

  /** A guard fired (already audited). */
  default void onDecision(Decision decision) {}

  /** The trainer was (re)started; {@code attempt} counts from 1. */
  default void onLaunch(int attempt, String reason) {}

  /** Line counters after each metric line: read, carried metrics, ignored. */
  default void onLines(long lines, long metricLines, long ignored) {}

  /** A warning about the run's input was recorded (already audited and printed). */
  default void onWarning(String message) {}

  /** The run ended. */
  default void onEnd(Supervisor.Result result) {}
}
