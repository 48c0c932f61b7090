package dev.stepwarden.supervise;

import dev.stepwarden.audit.AuditLog;
import dev.stepwarden.audit.AuditRecord;
import dev.stepwarden.checkpoints.CheckpointLedger;
import dev.stepwarden.control.ControlFile;
import dev.stepwarden.process.StopResult;
import dev.stepwarden.process.TrainerProcess;
import java.io.IOException;
import java.nio.file.Path;
import java.time.Duration;
import java.util.Optional;
import java.util.concurrent.TimeUnit;
import java.util.function.Consumer;

/**
 * Pre-emption (SIGUSR1 from a batch scheduler): asks the trainer for a last checkpoint (a
 * control-file request or a forwarded signal), waits a bounded time for one to settle, stops the
 * tree and reports what a {@code run --resume} will use.
 */
final class PreemptionStop {
  private PreemptionStop() {}

  /** Asks, waits, stops, and records {@code preempt} and {@code preempted}. */
  static void run(Preemption how, String why, TrainerProcess t, Object lock, RunParts parts,
      double rate, Path runDir, Consumer<String> say) throws IOException, InterruptedException {
    CheckpointKeeper keeper = parts.keeper();
    SamplePath path = parts.path();
    AuditLog audit = parts.audit();
    int before;
    synchronized (lock) {
      before = keeper.count();
      long step = path.currentStep();
      String askedBy;
      if (how.signal() != null) {
        askedBy = "signal " + how.signal() + " to pid " + t.pid();
        audit.append(new AuditRecord.Preempt(why, step, how.patience().toMillis(), askedBy));
        sendSignal(how.signal(), t.pid(), say);
      } else {
        long rev = parts.steering().requestCheckpoint(rate, step);
        askedBy = "control file revision " + rev + " with " + ControlFile.CHECKPOINT_REQUEST_KEY;
        audit.append(new AuditRecord.Preempt(why, step, how.patience().toMillis(), askedBy));
      }
    }
    say.accept("pre-empted (" + why + "): waiting up to " + how.patience().toSeconds()
        + " s for a checkpoint");
    long deadline = System.nanoTime() + how.patience().toNanos();
    boolean got = false;
    while (!got && System.nanoTime() < deadline && t.waitFor(Duration.ZERO).isEmpty()) {
      Thread.sleep(PeriodicWork.TICK.toMillis());
      synchronized (lock) {
        parts.periodic().scanNow(false);
        got = keeper.count() > before;
      }
    }
    StopResult stop = t.stop();
    synchronized (lock) {
      path.endGeneration();
      path.flush();
      parts.periodic().scanNow(!stop.killed());
      Optional<CheckpointLedger.Entry> latest = keeper.latest();
      audit.append(new AuditRecord.Preempted(keeper.count() > before,
          latest.map(e -> e.usable().toString()).orElse(null),
          latest.map(CheckpointLedger.Entry::step).orElse(null), stop.killed(),
          RunOutcome.REQUEUE.exitCode(), "state saved; continue with: stepwarden run --resume "
              + runDir));
    }
  }

  private static void sendSignal(String signal, long pid, Consumer<String> say) {
    try {
      Process p = new ProcessBuilder("kill", "-s", signal, Long.toString(pid))
          .redirectErrorStream(true).redirectOutput(ProcessBuilder.Redirect.DISCARD).start();
      if (!p.waitFor(5, TimeUnit.SECONDS)) {
        p.destroyForcibly();
      }
    } catch (IOException e) {
      say.accept("could not send " + signal + " to the trainer: " + e.getMessage());
    } catch (InterruptedException e) {
      Thread.currentThread().interrupt();
    }
  }
}
