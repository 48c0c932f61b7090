package dev.stepwarden.supervise;

import dev.stepwarden.audit.AuditRecord;
import dev.stepwarden.engine.Decision;
import dev.stepwarden.rules.GuardFile;
import java.util.Locale;

/** How a guard's decision is written down, and where its rewind goes. */
final class Decisions {
  private Decisions() {}

  /** The {@code decision} record of {@code d}, written before the action. */
  static AuditRecord.Decided record(Decision d) {
    return new AuditRecord.Decided(d.step(), d.guard(), d.evidence().detector(),
        d.evidence().summary(), d.evidence().figures(),
        d.actions().stream().map(Decisions::describe).toList(), d.rateBefore(), d.rateAfter(),
        d.ending().name().toLowerCase(Locale.ROOT), d.note());
  }

  /** The step a rewind aims at: the rise's onset when located, else the best, else now. */
  static long onsetStep(Decision d) {
    Object onset = d.evidence().figures().get("onset_step");
    if (onset instanceof Number n) {
      return n.longValue();
    }
    Object best = d.evidence().figures().get("best_step");
    return best instanceof Number n ? n.longValue() : d.step();
  }

  static String describe(GuardFile.Action a) {
    if (a instanceof GuardFile.Action.Scale s) {
      return "scale " + s.factor();
    }
    if (a instanceof GuardFile.Action.SetRate s) {
      return "set_rate " + s.rate();
    }
    if (a instanceof GuardFile.Action.Rewind r) {
      return r.skipBatches() > 0 ? "rewind, skip " + r.skipBatches() + " batches" : "rewind";
    }
    return a instanceof GuardFile.Action.Stop ? "stop" : "give_up";
  }
}
