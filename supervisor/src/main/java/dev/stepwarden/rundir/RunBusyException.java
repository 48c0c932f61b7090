package dev.stepwarden.rundir;

import java.nio.file.FileAlreadyExistsException;
import java.nio.file.Path;

/**
 * A run directory whose lock another live supervisor holds. A kind of "already exists" so that
 * every command which refuses an occupied run directory refuses this one the same way.
 */
public final class RunBusyException extends FileAlreadyExistsException {
  private static final long serialVersionUID = 1L;

  private final String holder;

  public RunBusyException(Path runDir, String holder) {
    super(runDir.toString(), null, "this run is being supervised right now by " + holder
        + "; wait for it to end, or stop that process first (a second supervisor would write"
        + " the same audit log and drive the same trainer)");
    this.holder = holder;
  }

  /** Who holds the run: e.g. {@code process 4242 on node-3 (since 2026-12-02T12:00:00Z)}. */
  public String holder() {
    return holder;
  }
}
