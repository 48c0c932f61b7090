package dev.stepwarden.metrics;

import java.util.AbstractMap;
import java.util.AbstractSet;
import java.util.Iterator;
import java.util.Map;
import java.util.NoSuchElementException;
import java.util.Set;

/**
 * The immutable, insertion-ordered series map of a {@link Sample} made by the intake: two small
 * arrays instead of a copied linked hash map, since one is made for every metric line. A sample
 * has a handful of series, so lookups scan.
 */
final class SeriesValues extends AbstractMap<String, Double> {
  private final String[] names;
  /**
   * Unboxed: the hot paths read {@link #valueAt} through {@link Sample#indexOf}; {@link #get}
   * boxes for the callers that want a map.
   */
  private final double[] values;

  /** {@code names} is shared between samples of the same shape and never changed. */
  SeriesValues(String[] names, double[] values) {
    if (names.length != values.length) {
      throw new IllegalArgumentException("names and values differ in length");
    }
    this.names = names;
    this.values = values;
  }

  /** An immutable copy of {@code map} in its iteration order. */
  static SeriesValues copyOf(Map<String, Double> map) {
    String[] n = new String[map.size()];
    double[] v = new double[n.length];
    int i = 0;
    for (Map.Entry<String, Double> e : map.entrySet()) {
      n[i] = java.util.Objects.requireNonNull(e.getKey(), "series name");
      v[i++] = java.util.Objects.requireNonNull(e.getValue(), "series value");
    }
    return new SeriesValues(n, v);
  }

  String name(int i) {
    return names[i];
  }

  double valueAt(int i) {
    return values[i];
  }

  @Override
  public int size() {
    return names.length;
  }

  @Override
  public boolean containsKey(Object key) {
    return indexOf(key) >= 0;
  }

  @Override
  public Double get(Object key) {
    int i = indexOf(key);
    return i < 0 ? null : Double.valueOf(values[i]);
  }

  int indexOf(Object key) {
    for (int i = 0; i < names.length; i++) {
      if (names[i] == key || names[i].equals(key)) {
        return i;
      }
    }
    return -1;
  }

  @Override
  public Set<Map.Entry<String, Double>> entrySet() {
    return new AbstractSet<>() {
      @Override
      public int size() {
        return names.length;
      }

      @Override
      public Iterator<Map.Entry<String, Double>> iterator() {
        return new Iterator<>() {
          private int i;

          @Override
          public boolean hasNext() {
            return i < names.length;
          }

          @Override
          public Map.Entry<String, Double> next() {
            if (i >= names.length) {
              throw new NoSuchElementException();
            }
            Map.Entry<String, Double> e = new AbstractMap.SimpleImmutableEntry<>(names[i],
                values[i]);
            i++;
            return e;
          }
        };
      }
    };
  }
}
