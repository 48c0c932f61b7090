package dev.stepwarden.metrics;

import java.util.Map;
import java.util.Objects;

/**
 * One normalized metric observation: the values of the guard file's named series (for example
 * {@code train}, {@code validation}) that one trainer line carried, on the step axis.
 *
 * <p>Values may be non-finite (NaN, infinities): a trainer printing {@code nan} is evidence, not a
 * parse error. Immutable; the map keeps insertion order (and indexes it: {@link #name(int)}) so replay and audit output are stable.
 *
 * @param step the step counter (as reported, or inferred when absent)
 * @param epoch the epoch, or NaN when the trainer did not report one
 * @param wallMillis wall time in epoch milliseconds when the supervisor read the line
 * @param values series name to value, for the series this line carried (never empty)
 */
public record Sample(long step, double epoch, long wallMillis, Map<String, Double> values) {
  public Sample {
    Objects.requireNonNull(values, "values");
    if (values.isEmpty()) {
      throw new IllegalArgumentException("a sample needs at least one series value");
    }
    if (!(values instanceof SeriesValues)) { // the intake's own map is immutable already
      values = SeriesValues.copyOf(values);
    }
  }

  /** How many series this sample carries. */
  public int size() {
    return values.size();
  }

  /** The name of series {@code i} (0 to {@link #size()} - 1), in the order the line gave them. */
  public String name(int i) {
    return ((SeriesValues) values).name(i);
  }

  /**
   * The index of {@code series} for {@link #valueAt}, or -1 when the line did not carry it: the
   * unboxed form of {@link #value}, for paths that run once per metric line.
   */
  public int indexOf(String series) {
    return ((SeriesValues) values).indexOf(series);
  }

  /** The value of series {@code i}, unboxed; for loops that visit every series of a sample. */
  public double valueAt(int i) {
    return ((SeriesValues) values).valueAt(i);
  }

  /** The value of {@code series} in this sample, or {@code null} when the line did not carry it. */
  public Double value(String series) {
    return values.get(series);
  }

  public boolean has(String series) {
    return values.containsKey(series);
  }
}
