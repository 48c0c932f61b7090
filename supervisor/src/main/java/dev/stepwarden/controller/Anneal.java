package dev.stepwarden.controller;

/**
 * The ending of a night with a known budget: over its last {@code fraction} of the planned steps
 * the rate falls along a half cosine from the rate in force to {@code floorRatio} of it
 * (Loshchilov and Hutter 2017, SGDR, eq. 5, one period without restart). Before that the rate is
 * left alone.
 */
public record Anneal(long plannedSteps, double fraction, double floorRatio) {
  public Anneal {
    if (plannedSteps <= 0 || !(fraction > 0 && fraction <= 1) || !(floorRatio >= 0
        && floorRatio < 1)) {
      throw new IllegalArgumentException("an anneal needs planned steps > 0, 0 < fraction <= 1"
          + " and 0 <= floor ratio < 1; got " + plannedSteps + ", " + fraction + ", "
          + floorRatio);
    }
  }

  /** The step from which the anneal runs. */
  public long start() {
    return plannedSteps - Math.round(fraction * plannedSteps);
  }

  /** The rate at {@code step} for a run whose rate at the anneal's start was {@code rate}. */
  public double rateAt(long step, double rate) {
    long from = start();
    if (step <= from) {
      return rate;
    }
    double t = Math.min(1.0, (double) (step - from) / (plannedSteps - from));
    double min = floorRatio * rate;
    return min + 0.5 * (rate - min) * (1 + Math.cos(Math.PI * t));
  }
}
