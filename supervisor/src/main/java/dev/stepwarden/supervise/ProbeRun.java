package dev.stepwarden.supervise;

import dev.stepwarden.audit.AuditRecord;
import dev.stepwarden.controller.BranchChoice;
import dev.stepwarden.process.TrainerProcess;
import dev.stepwarden.rules.GuardFile;
import dev.stepwarden.stats.RangeTest;
import java.io.IOException;
import java.time.Duration;
import java.util.ArrayList;
import java.util.LinkedHashMap;
import java.util.List;
import java.util.Map;
import java.util.function.BooleanSupplier;
import java.util.function.Consumer;

/**
 * The rate probe: a throw-away launch whose rate is ramped through the control file, stopped
 * when the ramp ends or the loss runs away; the range read off it ({@link RangeTest}) sets the
 * starting rate, and the real run then starts from scratch. Its lines are the probe's, never the
 * guards', and its checkpoints are baselined so that no rewind ever lands on them.
 */
final class ProbeRun {
  /** Starts the probe's trainer at its first rate (the coordinator's launch). */
  interface Starter {
    TrainerProcess start(String reason, double rate, long revision) throws IOException;
  }

  private ProbeRun() {}

  /** A probe that printed no training loss: the run ends instead of guessing. */
  static final double READ_NOTHING = -1;

  /**
   * Runs the probe (and, with {@code probe.branch}, the check of its pick); returns the starting
   * rate, NaN when none was found, {@link #READ_NOTHING} when the probe read no training loss.
   */
  static double run(GuardFile.Probe p, GuardFile rules, Object lock, RunParts parts,
      BooleanSupplier interrupted, Consumer<String> say, Starter starter)
      throws IOException, InterruptedException {
    RateProbe rp = new RateProbe(p, rules.read());
    if (!throwAway(rp, "rate probe", lock, parts, interrupted, starter)) {
      return Double.NaN;
    }
    double rate = rules.run().learningRate();
    RangeTest.Reading r;
    synchronized (lock) {
      r = rp.reading();
      if (r.found()) {
        rate = clamp(rules, r.pick());
      }
      parts.audit().append(new AuditRecord.Probe(rp.steps(), r.found(),
          r.found() ? r.lower() : null, r.found() ? r.upper() : null, rate, r.note(),
          rp.levels()));
      say.accept("rate probe: " + r.note());
      if (rp.steps() == 0) {
        return READ_NOTHING;
      }
    }
    if (r.found() && p.branch() > 0) {
      rate = checkPick(rate, p.branch(), rules, lock, parts, interrupted, say, starter);
    }
    synchronized (lock) {
      parts.keeper().baseline();
    }
    return r.found() ? rate : Double.NaN;
  }

  private static double clamp(GuardFile rules, double rate) {
    return Math.min(rules.limits().maxRate(), Math.max(rules.limits().minRate(), rate));
  }

  /**
   * Checks the probe's pick (one rung of successive halving, Li et al. 2017, anchored on the
   * pick): launches from scratch at the pick x 1/2, 1 and 2 for {@code samples} training samples
   * each, and keeps the rate whose branch ends lowest by more than noise ({@link BranchChoice}).
   * The branches, their cost and the verdict go to the audit log as one {@code branches} record.
   */
  private static double checkPick(double pick, int samples, GuardFile rules, Object lock,
      RunParts parts, BooleanSupplier interrupted, Consumer<String> say, Starter starter)
      throws IOException, InterruptedException {
    double[] rates = {clamp(rules, pick / 2), pick, clamp(rules, pick * 2)};
    List<BranchChoice.Branch> branches = new ArrayList<>();
    List<Map<String, Object>> rows = new ArrayList<>();
    for (double rate : rates) {
      RateProbe b = RateProbe.branch(rate, samples, rules.read());
      if (!throwAway(b, "rate branch", lock, parts, interrupted, starter)) {
        return pick;
      }
      branches.add(new BranchChoice.Branch(rate, b.lastLevelLosses()));
      Map<String, Object> row = new LinkedHashMap<>();
      row.put("learning_rate", rate);
      row.put("steps", b.steps());
      rows.add(row);
    }
    BranchChoice.Verdict v = BranchChoice.choose(branches, 1);
    double rate = v.index() < 0 ? pick : v.rate();
    synchronized (lock) {
      for (int i = 0; i < rows.size(); i++) {
        rows.get(i).put("tail_mean", Double.isNaN(v.means()[i]) ? null : v.means()[i]);
      }
      Map<String, Object> f = new LinkedHashMap<>();
      f.put("pick", pick);
      f.put("branches", rows);
      f.put("steps", rows.stream().mapToLong(m -> ((Number) m.get("steps")).longValue()).sum());
      f.put("welch_t", Double.isNaN(v.t()) ? null : v.t());
      f.put("learning_rate", rate);
      f.put("note", v.note());
      parts.audit().append("branches", f);
      say.accept("rate branches: " + v.note() + "; starting at " + Launcher.formatRate(rate));
    }
    return rate;
  }

  /**
   * One throw-away launch fed to {@code rp} until it is done, the trainer exits or a signal
   * comes; false when a signal came before it launched.
   */
  private static boolean throwAway(RateProbe rp, String reason, Object lock, RunParts parts,
      BooleanSupplier interrupted, Starter starter) throws IOException, InterruptedException {
    if (interrupted.getAsBoolean()) {
      return false;
    }
    Steering steering = parts.steering();
    SamplePath path = parts.path();
    TrainerProcess trainer;
    synchronized (lock) {
      long revision = steering.probeRate(rp.rate(), 0);
      path.probe((source, stderr, line, now) -> {
        double next = source >= 0 ? rp.acceptSource(source, line, now)
            : rp.accept(stderr, line, now);
        if (Double.isFinite(next)) {
          try {
            steering.probeRate(next, rp.steps());
          } catch (IOException e) {
            rp.finish();
          }
        }
      });
      trainer = starter.start(reason, rp.rate(), revision);
    }
    while (!interrupted.getAsBoolean() && !probeDone(lock, rp)
        && trainer.waitFor(Duration.ofMillis(50)).isEmpty()) {
      // the probe's lines move its ramp on, on the pump threads
    }
    trainer.stop();
    synchronized (lock) {
      path.endGeneration();
      path.probe(null);
      rp.close();
    }
    return true;
  }

  private static boolean probeDone(Object lock, RateProbe rp) {
    synchronized (lock) {
      return rp.done();
    }
  }
}
