package dev.stepwarden.metrics;

import java.util.ArrayList;
import java.util.List;

/**
 * A decimated history of one series for the morning report, in memory that does not grow with
 * the run: a fixed number of buckets, each covering the same number of consecutive samples and
 * keeping their step range, minimum, maximum, last value, count and how many were non-finite.
 * When every bucket is full, neighbouring pairs merge (each then covers twice as many samples),
 * so after n samples each bucket covers a power of two near n / buckets and extremes are never
 * lost: a spike shows in its bucket's max however long the run.
 *
 * <p>Not thread-safe.
 */
public final class SeriesHistory {
  /** One bucket: samples with steps {@code firstStep..lastStep}; min/max over finite values. */
  public record Bucket(long firstStep, long lastStep, long count, double min, double max,
      double last, long nonFinite) {}

  private final int capacity;
  private final long[] firstStep;
  private final long[] lastStep;
  private final long[] count;
  private final double[] min;
  private final double[] max;
  private final double[] last;
  private final long[] nonFinite;
  private int used;
  private long width = 1;
  private long total;

  /** {@code buckets} must be even and at least 2. */
  public SeriesHistory(int buckets) {
    if (buckets < 2 || buckets % 2 != 0) {
      throw new IllegalArgumentException("buckets must be even and at least 2, was " + buckets);
    }
    capacity = buckets;
    firstStep = new long[buckets];
    lastStep = new long[buckets];
    count = new long[buckets];
    min = new double[buckets];
    max = new double[buckets];
    last = new double[buckets];
    nonFinite = new long[buckets];
  }

  public void add(long step, double value) {
    if (used > 0 && count[used - 1] < width) {
      into(used - 1, step, value);
    } else {
      if (used == capacity) {
        halve();
      }
      int b = used++;
      firstStep[b] = step;
      count[b] = 0;
      min[b] = Double.POSITIVE_INFINITY;
      max[b] = Double.NEGATIVE_INFINITY;
      nonFinite[b] = 0;
      into(b, step, value);
    }
    total++;
  }

  private void into(int b, long step, double value) {
    lastStep[b] = step;
    count[b]++;
    last[b] = value;
    if (Double.isFinite(value)) {
      min[b] = Math.min(min[b], value);
      max[b] = Math.max(max[b], value);
    } else {
      nonFinite[b]++;
    }
  }

  /** Merges bucket pairs (2k, 2k+1) into k; each bucket then covers twice the samples. */
  private void halve() {
    for (int k = 0; k < capacity / 2; k++) {
      int a = 2 * k;
      int b = a + 1;
      firstStep[k] = firstStep[a];
      lastStep[k] = lastStep[b];
      count[k] = count[a] + count[b];
      min[k] = Math.min(min[a], min[b]);
      max[k] = Math.max(max[a], max[b]);
      last[k] = last[b];
      nonFinite[k] = nonFinite[a] + nonFinite[b];
    }
    used = capacity / 2;
    width *= 2;
  }

  /** Samples added in all. */
  public long samples() {
    return total;
  }

  /** Samples each full bucket covers now. */
  public long bucketWidth() {
    return width;
  }

  /** The buckets in step order; min/max are NaN in a bucket that held only non-finite values. */
  public List<Bucket> buckets() {
    List<Bucket> out = new ArrayList<>(used);
    for (int b = 0; b < used; b++) {
      boolean none = count[b] == nonFinite[b];
      out.add(new Bucket(firstStep[b], lastStep[b], count[b], none ? Double.NaN : min[b],
          none ? Double.NaN : max[b], last[b], nonFinite[b]));
    }
    return out;
  }
}
