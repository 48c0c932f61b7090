package dev.stepwarden.detectors;

import java.util.Arrays;

/**
 * The level a generation started at: the median of its first {@link #COUNT} finite values. It
 * gives "near zero" a scale: a wobble or a climb of 0.004 matters on a loss that started at
 * 0.01, not on one that started at ln 10. Kept across a rewind (the generation's start did not
 * change), cleared when a new generation starts from scratch.
 */
final class StartLevel {
  static final int COUNT = 9;
  private final double[] first = new double[COUNT];
  private int seen;
  private double level = Double.NaN;

  void offer(double v) {
    if (seen < COUNT && Double.isFinite(v)) {
      first[seen++] = v;
      if (seen == COUNT) {
        double[] s = first.clone();
        Arrays.sort(s);
        level = Math.abs(s[COUNT / 2]);
      }
    }
  }

  /** The level, or NaN until {@link #COUNT} values were seen. */
  double level() {
    return level;
  }

  void reset() {
    seen = 0;
    level = Double.NaN;
  }
}
