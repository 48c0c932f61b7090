package dev.stepwarden.supervise;

import java.io.PrintStream;
import java.nio.file.Path;
import java.time.Clock;

/**
 * Options that are not part of the guard file.
 *
 * @param preemption what to do on {@link Supervisor#preempt} (SIGUSR1)
 * @param copyVault copy checkpoints into the vault instead of hard-linking them
 */
public record RunOptions(Path runDir, boolean quiet, Clock clock, PrintStream console,
    RunObserver observer, Preemption preemption, boolean copyVault) {
  public RunOptions {
    clock = clock == null ? Clock.systemUTC() : clock;
    console = console == null ? System.err : console;
    observer = observer == null ? RunObserver.NONE : observer;
    preemption = preemption == null ? Preemption.DEFAULT : preemption;
  }

  public RunOptions(Path runDir, boolean quiet, Clock clock, PrintStream console,
      RunObserver observer) {
    this(runDir, quiet, clock, console, observer, null, false);
  }

  public RunOptions(Path runDir, boolean quiet, Clock clock, PrintStream console) {
    this(runDir, quiet, clock, console, null);
  }

  public RunOptions withPreemption(Preemption p) {
    return new RunOptions(runDir, quiet, clock, console, observer, p, copyVault);
  }

  public RunOptions withCopyVault(boolean copy) {
    return new RunOptions(runDir, quiet, clock, console, observer, preemption, copy);
  }

  public RunOptions withObserver(RunObserver o) {
    return new RunOptions(runDir, quiet, clock, console, o, preemption, copyVault);
  }
}
