package dev.stepwarden.controller;

import java.util.Locale;

/**
 * Reads the early phase of a launch: alive, slow, or dead. After a rate far too high a ReLU
 * network can die in its first epoch: every later checkpoint is dead too, so rewinding into it
 * and lowering the rate cannot revive it; the run must start again from scratch at a lower rate.
 * A rate far too low leaves the loss near chance level too, but without the excursions: that
 * start is slow, not dead, and a lower rate would make it worse.
 *
 * <p>The loss is averaged over a quarter of the phase at each end (mini-batch noise). Dead: a
 * non-finite value, a tail above the head by more than {@link #TOLERANCE}, or a tail at chance
 * level (within {@link #TOLERANCE} of ln(classes) for balanced classes, the loss of a constant
 * prediction) after a value at least {@link #EXCURSION} x the head. Slow: a tail at chance level
 * without such an excursion. The thresholds are common practice, not taken from a source.
 */
public final class EarlyPhase {
  static final double PART = 0.25;
  static final double TOLERANCE = 0.05;
  static final double EXCURSION = 1.5;

  /** What the early phase shows. */
  public enum Kind { ALIVE, SLOW, DEAD }

  /** The reading with a sentence for the audit log. */
  public record Reading(Kind kind, String reason) {}

  private EarlyPhase() {}

  /**
   * @param losses the training losses of the early phase, in order (at least 4)
   * @param chance the chance-level loss, or NaN when unknown (then only the rise is judged)
   */
  public static Reading read(double[] losses, double chance) {
    if (losses.length < 4) {
      throw new IllegalArgumentException("an early phase needs at least 4 losses, got "
          + losses.length);
    }
    int part = Math.max(1, (int) Math.round(losses.length * PART));
    double head = mean(losses, 0, part);
    double tail = mean(losses, losses.length - part, losses.length);
    double max = Double.NEGATIVE_INFINITY;
    for (double v : losses) {
      if (!Double.isFinite(v)) {
        return new Reading(Kind.DEAD, "the training loss turned non-finite in the first "
            + losses.length + " samples");
      }
      max = Math.max(max, v);
    }
    if (tail > (1 + TOLERANCE) * head) {
      return new Reading(Kind.DEAD, String.format(Locale.ROOT, "the training loss %.4g ended"
          + " above its start %.4g after %d samples", tail, head, losses.length));
    }
    boolean atChance = Double.isFinite(chance) && tail >= (1 - TOLERANCE) * chance;
    if (atChance && max >= EXCURSION * head) {
      return new Reading(Kind.DEAD, String.format(Locale.ROOT, "the training loss %.4g is at"
          + " chance level %.4g after rising to %.4g in the first %d samples", tail, chance, max,
          losses.length));
    }
    if (atChance) {
      return new Reading(Kind.SLOW, String.format(Locale.ROOT, "the training loss %.4g is still"
          + " at chance level %.4g after %d samples, without excursions", tail, chance,
          losses.length));
    }
    return new Reading(Kind.ALIVE, String.format(Locale.ROOT, "the training loss fell from %.4g"
        + " to %.4g in %d samples", head, tail, losses.length));
  }

  private static double mean(double[] v, int from, int to) {
    double s = 0;
    for (int i = from; i < to; i++) {
      s += v[i];
    }
    return s / (to - from);
  }
}
