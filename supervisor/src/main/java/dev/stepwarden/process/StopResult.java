package dev.stepwarden.process;

import java.time.Duration;
import java.util.Objects;
import java.util.OptionalInt;

/**
 * What {@link TrainerProcess#stop()} found and did.
 *
 * @param wasAlive the trainer or some process of its group or tree was still running when the
 *     stop began
 * @param killed KILL had to be sent because TERM did not end everything within the grace
 * @param exitCode the trainer's exit code (128 + signal number when a signal ended it; the JDK's
 *     convention), empty when it could not be reaped (for example stuck in uninterruptible I/O)
 * @param took how long the stop took
 */
public record StopResult(boolean wasAlive, boolean killed, OptionalInt exitCode, Duration took) {
  public StopResult {
    Objects.requireNonNull(exitCode, "exitCode");
    Objects.requireNonNull(took, "took");
  }
}
