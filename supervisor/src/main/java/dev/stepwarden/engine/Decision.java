package dev.stepwarden.engine;

import dev.stepwarden.detectors.Evidence;
import dev.stepwarden.rules.GuardFile.Action;
import java.util.List;
import java.util.Objects;

/**
 * What the policy decided on one sample, with the evidence that made a guard fire.
 *
 * @param guard the guard's name (built-in guards are named in parentheses)
 * @param step the step of the sample that triggered it
 * @param wallMillis wall time of that sample
 * @param evidence the detector's numbers
 * @param actions the actions to carry out, in order
 * @param rateBefore the rate in force before the decision
 * @param rateAfter the rate after it (equal to before when the rate does not change)
 * @param ending whether the run goes on or ends, and how
 * @param note why the policy changed or capped what the guard asked for, or empty
 */
public record Decision(String guard, long step, long wallMillis, Evidence evidence,
    List<Action> actions, double rateBefore, double rateAfter, Ending ending, String note) {

  /** How a decision leaves the run. */
  public enum Ending {
    CONTINUE,
    /** Stopped early as a success (exit 3). */
    STOP_EARLY,
    /** A limit ran out (exit 4). */
    GIVE_UP
  }

  public Decision {
    Objects.requireNonNull(guard, "guard");
    Objects.requireNonNull(evidence, "evidence");
    Objects.requireNonNull(ending, "ending");
    actions = List.copyOf(actions);
    note = note == null ? "" : note;
  }

  public boolean changesRate() {
    return Double.compare(rateBefore, rateAfter) != 0;
  }

  public boolean rewinds() {
    return ending == Ending.CONTINUE && actions.stream().anyMatch(a -> a instanceof Action.Rewind);
  }

  /** Batches to skip after a rewind (0 when none). */
  public int skipBatches() {
    return actions.stream().filter(a -> a instanceof Action.Rewind)
        .mapToInt(a -> ((Action.Rewind) a).skipBatches()).findFirst().orElse(0);
  }
}
