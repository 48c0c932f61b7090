package dev.stepwarden.cli;

/** The process exit codes of every stepwarden command (listed in {@code --help}). */
public final class ExitCodes {
  private ExitCodes() {}

  /** The trainer finished normally (or the command did what was asked). */
  public static final int OK = 0;
  /** The supervisor itself failed. */
  public static final int INTERNAL = 1;
  /** The command line was wrong. */
  public static final int USAGE = 2;
  /** A guard stopped the run early: a success; the best checkpoint is named. */
  public static final int STOPPED_EARLY = 3;
  /** A limit ran out: rewinds, crash restarts, or the rate floor with divergence. */
  public static final int GAVE_UP = 4;
  /** Interrupted by SIGINT (SIGTERM gives 143). */
  public static final int INTERRUPTED = 130;
  /**
   * Pre-empted (SIGUSR1): the trainer was asked for a checkpoint and stopped, the state is saved;
   * requeue the job and continue with {@code run --resume RUN_DIR}. EX_TEMPFAIL of sysexits.h.
   */
  public static final int REQUEUE = 75;
  /** The guard file (or another configuration) is invalid. */
  public static final int CONFIG = 78;

  static final String TABLE = "Exit codes:%n"
      + "  0   the trainer finished normally%n"
      + "  3   stopped early by a guard (a success: the best checkpoint is named)%n"
      + "  4   gave up (a limit ran out: rewinds, crash restarts, floor reached while diverging)%n"
      + "  2   usage error%n"
      + "  75  pre-empted by SIGUSR1: checkpoint asked for, state saved; requeue and continue"
      + " with run --resume RUN_DIR%n"
      + "  78  configuration error (the guard file names the line and column)%n"
      + "  1   internal error%n"
      + "  130 interrupted by SIGINT (143 for SIGTERM); the trainer's whole tree is stopped first";
}
