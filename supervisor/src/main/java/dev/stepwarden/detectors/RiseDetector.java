package dev.stepwarden.detectors;

import java.util.Arrays;
import java.util.LinkedHashMap;
import java.util.Map;
import java.util.Optional;

/**
 * Divergence as leaving the band of the run's own recent healthy values: the series sits more
 * than {@code units} noise units above the band's level, and more than {@code ratio} times that
 * level, for {@code samples} points in a row.
 *
 * <p>The band is the median m and the spread s of the last {@code window} admitted values of the
 * current generation, with s = IQR / 1.349 (the interquartile range of a normal distribution is
 * 1.349 standard deviations; a standard table value), and never below 1 % of |m| so a series
 * printed with few digits still has a spread. Both are robust: a few wild batches move neither.
 * A value is admitted clipped to the band's upper edge m + units s, so a divergence cannot widen
 * the band that judges it, while a genuine slow shift still moves the band. The ratio condition
 * keeps the test honest near zero: once a classifier fits its training set, per-batch losses of
 * 0.01 with a spread of 0.005 make an ordinary 0.13 batch "25 noise units" high, yet it is not
 * divergence unless it is also a multiple of the level and lasts. Judgement starts once the band
 * holds {@link #MIN_BAND} values. Non-finite values are skipped (see {@link NonFiniteDetector}).
 *
 * <p>Resets: {@link #reset()} (a new generation from scratch) empties the band; {@link
 * #rewindTo(long)} restores the band as it stood at the newest snapshot at or before the
 * checkpoint's step (one snapshot every {@code window} values, the last {@link #SNAPSHOTS} kept),
 * and empties it when none is that old. A rate change within a launch keeps the band: a lower
 * rate does not move the healthy level, and starting over would judge against a single batch.
 *
 * <p>Cost per point: a binary search and a block move of at most {@code window} doubles in a
 * sorted copy (no sort); the median and quartiles are then read off by index.
 *
 * <p>Figures: {@code value}, {@code level}, {@code spread}, {@code noise_units}, {@code
 * limit_units}, {@code ratio}, {@code limit_ratio}, {@code window}, {@code samples}, {@code
 * since_step}.
 */
final class RiseDetector implements Detector {
  /** Values in the band before it judges. */
  static final int MIN_BAND = 8;
  /** Snapshots of the band kept for rewinds. */
  static final int SNAPSHOTS = 16;
  /** IQR of the standard normal distribution (Phi^-1(0.75) - Phi^-1(0.25)). */
  static final double NORMAL_IQR = 1.3489795;
  static final double SPREAD_FLOOR = 0.01;

  private final String series;
  private final double units;
  private final double ratio;
  private final int samples;
  private final double[] ring;
  private final double[] sorted;
  private int start;
  private int size;
  private long admitted;
  private int run;
  private long runStartStep;
  private final long[] snapStep = new long[SNAPSHOTS];
  private final double[][] snapValues = new double[SNAPSHOTS][];
  private int snaps;

  RiseDetector(String series, double units, double ratio, int samples, int window) {
    this.series = Figures.series(series);
    DetectorKind k = DetectorKind.RISES;
    this.units = k.param("noise_units").require(units);
    this.ratio = k.param("above_level").require(ratio);
    this.samples = k.param("samples").requireInt(samples);
    int w = k.param("window").requireInt(window);
    this.ring = new double[w];
    this.sorted = new double[w];
  }

  @Override
  public Optional<Evidence> offer(long step, double value) {
    if (!Double.isFinite(value)) {
      return Optional.empty();
    }
    Optional<Evidence> out = Optional.empty();
    double admit = value;
    if (size >= MIN_BAND) {
      double level = level();
      double spread = spread(level);
      double edge = level + units * spread;
      if (value > edge && value > ratio * level && level > 0) {
        if (run == 0) {
          runStartStep = step;
        }
        run++;
      } else {
        run = 0;
      }
      if (run >= samples) {
        out = Optional.of(evidence(value, level, spread));
      }
      admit = Math.min(value, edge);
    }
    admit(step, admit);
    return out;
  }

  private Evidence evidence(double value, double level, double spread) {
    double noise = (value - level) / spread;
    Map<String, Object> f = new LinkedHashMap<>();
    f.put("value", value);
    f.put("level", level);
    f.put("spread", spread);
    f.put("noise_units", noise);
    f.put("limit_units", units);
    f.put("ratio", value / level);
    f.put("limit_ratio", ratio);
    f.put("window", size);
    f.put("samples", run);
    f.put("since_step", runStartStep);
    String summary = series + " is " + Figures.num(value) + ", " + Figures.num(noise)
        + " noise units above its band (median " + Figures.num(level) + ", spread "
        + Figures.num(spread) + " over its last " + size + " healthy values; limit "
        + Figures.num(units) + ") and " + Figures.num(value / level) + " x the median (limit "
        + Figures.num(ratio) + "), for " + run + " samples in a row since step " + runStartStep
        + ".";
    return new Evidence(DetectorKind.RISES.key(), summary, f);
  }

  private double level() {
    int mid = size / 2;
    return size % 2 == 1 ? sorted[mid] : 0.5 * (sorted[mid - 1] + sorted[mid]);
  }

  private double spread(double level) {
    double iqr = quantile(0.75) - quantile(0.25);
    return Math.max(iqr / NORMAL_IQR, Math.max(SPREAD_FLOOR * Math.abs(level), 1e-12));
  }

  private double quantile(double q) {
    double at = q * (size - 1);
    int lo = (int) at;
    int hi = Math.min(lo + 1, size - 1);
    return sorted[lo] + (at - lo) * (sorted[hi] - sorted[lo]);
  }

  private void admit(long step, double v) {
    int w = ring.length;
    if (size == w) {
      double old = ring[start];
      remove(old);
      ring[start] = v;
      start = start + 1 == w ? 0 : start + 1;
    } else {
      ring[(start + size) % w] = v;
    }
    insert(v);
    admitted++;
    if (admitted % w == 0) {
      snapshot(step);
    }
  }

  private void insert(double v) {
    int at = Arrays.binarySearch(sorted, 0, size, v);
    if (at < 0) {
      at = -at - 1;
    }
    System.arraycopy(sorted, at, sorted, at + 1, size - at);
    sorted[at] = v;
    size++;
  }

  private void remove(double v) {
    int at = Arrays.binarySearch(sorted, 0, size, v);
    System.arraycopy(sorted, at + 1, sorted, at, size - at - 1);
    size--;
  }

  private void snapshot(long step) {
    int slot = snaps % SNAPSHOTS;
    double[] copy = snapValues[slot] == null ? new double[ring.length] : snapValues[slot];
    for (int i = 0; i < size; i++) {
      copy[i] = ring[(start + i) % ring.length];
    }
    snapValues[slot] = copy;
    snapStep[slot] = step;
    snaps++;
  }

  @Override
  public void reset() {
    start = 0;
    size = 0;
    admitted = 0;
    run = 0;
    snaps = 0;
  }

  /** Keeps the band: a new rate does not move the healthy level. */
  @Override
  public void rateChanged() {
    run = 0;
  }

  /** Restores the band of the newest snapshot taken at or before {@code step}. */
  @Override
  public void rewindTo(long step) {
    int best = -1;
    for (int i = Math.max(0, snaps - SNAPSHOTS); i < snaps; i++) {
      int slot = i % SNAPSHOTS;
      if (snapStep[slot] <= step) {
        best = i;
      }
    }
    if (best < 0) {
      start = 0;
      size = 0;
      run = 0; // no band that old: a new one, but the snapshots stay for a later rewind
      return;
    }
    double[] values = snapValues[best % SNAPSHOTS];
    int keep = best + 1;
    start = 0;
    size = ring.length;
    System.arraycopy(values, 0, ring, 0, size);
    System.arraycopy(values, 0, sorted, 0, size);
    Arrays.sort(sorted, 0, size);
    admitted = (long) keep * ring.length;
    snaps = keep;
    run = 0;
  }
}
