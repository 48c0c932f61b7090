package dev.stepwarden.supervise;

/** How a supervised run ended, and the process exit code that says so. */
public enum RunOutcome {
  /** The trainer finished normally. */
  FINISHED(0),
  /** A guard stopped the run early: a success, the best checkpoint is named. */
  STOPPED_EARLY(3),
  /** A limit ran out (rewinds, crash restarts, the rate floor with divergence). */
  GAVE_UP(4),
  /** The supervisor was interrupted (SIGINT 130; SIGTERM ends the JVM with 143). */
  INTERRUPTED(130),
  /**
   * The supervisor was pre-empted (SIGUSR1 from a batch scheduler): it asked the trainer for a
   * checkpoint, stopped it and saved its state; {@code run --resume} continues. 75 is EX_TEMPFAIL
   * of sysexits.h: "try again later".
   */
  REQUEUE(75),
  /** The supervisor itself failed (for example the run directory became unwritable). */
  INTERNAL_ERROR(1);

  private final int exitCode;

  RunOutcome(int exitCode) {
    this.exitCode = exitCode;
  }

  public int exitCode() {
    return exitCode;
  }
}
