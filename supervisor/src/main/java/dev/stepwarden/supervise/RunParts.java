package dev.stepwarden.supervise;

import dev.stepwarden.audit.AuditLog;
import dev.stepwarden.control.ControlFile;
import dev.stepwarden.engine.GuardEngine;
import dev.stepwarden.rules.GuardFile;
import java.io.IOException;
import java.nio.file.Path;
import java.time.Clock;
import java.util.function.Consumer;
import java.util.function.LongSupplier;

/**
 * The parts of one run over its run directory, opened together in one order: the audit log
 * first (everything else records into it), then steering, the sample path, the checkpoint
 * keeper, the launcher and the periodic task; the followed metric files start last, when every
 * part their lines reach exists.
 */
record RunParts(AuditLog audit, Steering steering, SamplePath path, CheckpointKeeper keeper,
    Launcher launcher, PeriodicWork periodic) {
  /** A checkpoint counts once unchanged this long (a file still being written never does). */
  private static final long SETTLE_MILLIS = 500;

  /** What the parts hand back to the coordinator; called under the run's lock. */
  interface Reactions extends SamplePath.Steps, PeriodicWork.Consequences {}

  static RunParts open(RunDirectory dir, Path workdir, GuardFile rules,
      RunOptions options, Object lock, GuardEngine engine, long controlRevision,
      Reactions to, LongSupplier trainerPid, Consumer<String> say) throws IOException {
    Clock clock = options.clock();
    AuditLog audit = AuditLog.open(dir.privateFile(RunDirectory.AUDIT), clock);
    ControlFile control = new ControlFile(dir.file(RunDirectory.CONTROL), controlRevision);
    Steering steering = new Steering(control, rules.steer(), audit, clock);
    SamplePath path = new SamplePath(lock, clock, rules.read(),
        NormalizedWriter.append(dir.privateFile(RunDirectory.METRICS)), audit,
        options.observer(), m -> options.console().println("stepwarden: warning: " + m));
    path.engine(engine);
    CheckpointKeeper keeper = CheckpointKeeper.open(rules.checkpoints(), dir, workdir,
        options.copyVault(), SETTLE_MILLIS, trainerPid, audit, say);
    Launcher launcher = new Launcher(dir, rules, workdir, options.quiet(), control.path());
    PeriodicWork periodic = new PeriodicWork(lock, clock, path, keeper, steering,
        rules.limits(), audit, say, to);
    path.follow(workdir, to);
    return new RunParts(audit, steering, path, keeper, launcher, periodic);
  }
}
