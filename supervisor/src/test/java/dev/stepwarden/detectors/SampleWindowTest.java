package dev.stepwarden.detectors;

import static org.assertj.core.api.Assertions.assertThat;
import static org.assertj.core.api.Assertions.assertThatThrownBy;

import org.junit.jupiter.api.Test;

class SampleWindowTest {

  @Test
  void keepsTheLastPointsOldestFirst() {
    SampleWindow w = new SampleWindow(3);
    for (int i = 1; i <= 5; i++) {
      w.add(i * 10L, i);
    }
    assertThat(w.isFull()).isTrue();
    double[] values = new double[3];
    long[] steps = new long[3];
    assertThat(w.copyValues(values)).isEqualTo(3);
    w.copySteps(steps);
    assertThat(values).containsExactly(3, 4, 5);
    assertThat(steps).containsExactly(30, 40, 50);
    assertThat(w.value(0)).isEqualTo(3);
    assertThat(w.step(2)).isEqualTo(50);
    w.clear();
    assertThat(w.size()).isZero();
    assertThatThrownBy(() -> w.value(0)).isInstanceOf(IndexOutOfBoundsException.class);
  }

  @Test
  void keepsTheLastPointsForEveryCapacityAndCount() {
    for (int capacity = 1; capacity <= 7; capacity++) {
      for (int n = 0; n <= 3 * capacity + 1; n++) {
        SampleWindow w = new SampleWindow(capacity);
        for (int i = 0; i < n; i++) {
          w.add(i, i * 0.5);
        }
        int kept = Math.min(n, capacity);
        assertThat(w.size()).isEqualTo(kept);
        for (int i = 0; i < kept; i++) {
          assertThat(w.step(i)).as("capacity %d, n %d, i %d", capacity, n, i)
              .isEqualTo(n - kept + i);
          assertThat(w.value(i)).isEqualTo((n - kept + i) * 0.5);
        }
      }
    }
  }

  @Test
  void rejectsEmptyCapacity() {
    assertThatThrownBy(() -> new SampleWindow(0))
        .isInstanceOf(IllegalArgumentException.class)
        .hasMessageContaining("capacity");
  }
}
