package dev.stepwarden.detectors;

/**
 * The last {@code capacity} points of a series as a ring buffer of primitive steps and values,
 * oldest first. Both arrays are allocated once, so memory stays flat however long the run is.
 */
final class SampleWindow {
  private final long[] steps;
  private final double[] values;
  private int start;
  private int size;

  SampleWindow(int capacity) {
    if (capacity < 1) {
      throw new IllegalArgumentException("window capacity must be at least 1, got " + capacity);
    }
    steps = new long[capacity];
    values = new double[capacity];
  }

  /** Appends a point; when full, the oldest point falls out. */
  void add(long step, double value) {
    int capacity = values.length;
    if (size < capacity) {
      int at = start + size; // start and size are below capacity: one subtraction wraps it
      if (at >= capacity) {
        at -= capacity;
      }
      steps[at] = step;
      values[at] = value;
      size++;
    } else {
      steps[start] = step;
      values[start] = value;
      start = start + 1 == capacity ? 0 : start + 1;
    }
  }

  int size() {
    return size;
  }

  int capacity() {
    return values.length;
  }

  boolean isFull() {
    return size == values.length;
  }

  /** The value {@code i} places after the oldest one (0 = oldest, size-1 = newest). */
  double value(int i) {
    return values[index(i)];
  }

  long step(int i) {
    return steps[index(i)];
  }

  /** Copies the values oldest first into {@code into[0..size)}; returns the count. */
  int copyValues(double[] into) {
    for (int i = 0; i < size; i++) {
      into[i] = values[(start + i) % values.length];
    }
    return size;
  }

  /** Copies the steps oldest first into {@code into[0..size)}; returns the count. */
  int copySteps(long[] into) {
    for (int i = 0; i < size; i++) {
      into[i] = steps[(start + i) % steps.length];
    }
    return size;
  }

  void clear() {
    start = 0;
    size = 0;
  }

  private int index(int i) {
    if (i < 0 || i >= size) {
      throw new IndexOutOfBoundsException("window index " + i + " outside 0.." + (size - 1));
    }
    return (start + i) % values.length;
  }
}
