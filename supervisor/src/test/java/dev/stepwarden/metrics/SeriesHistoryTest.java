package dev.stepwarden.metrics;

import static org.assertj.core.api.Assertions.assertThat;
import static org.assertj.core.api.Assertions.assertThatThrownBy;

import java.util.List;
import java.util.Random;
import org.junit.jupiter.api.Test;

class SeriesHistoryTest {
  @Test
  void bucketsAgreeWithABruteForceScanOfTheSamplesTheyCover() {
    Random rnd = new Random(7);
    SeriesHistory h = new SeriesHistory(16);
    int n = 1000;
    double[] v = new double[n];
    for (int i = 0; i < n; i++) {
      v[i] = i % 97 == 0 ? Double.NaN : rnd.nextGaussian();
      h.add(10L * i, v[i]);
    }
    List<SeriesHistory.Bucket> bs = h.buckets();
    assertThat(bs.size()).isLessThanOrEqualTo(16);
    long covered = 0;
    for (SeriesHistory.Bucket b : bs) {
      int from = (int) (b.firstStep() / 10);
      int to = (int) (b.lastStep() / 10);
      assertThat(b.count()).isEqualTo(to - from + 1);
      double min = Double.POSITIVE_INFINITY;
      double max = Double.NEGATIVE_INFINITY;
      long nonFinite = 0;
      for (int i = from; i <= to; i++) {
        if (Double.isNaN(v[i])) {
          nonFinite++;
        } else {
          min = Math.min(min, v[i]);
          max = Math.max(max, v[i]);
        }
      }
      assertThat(b.min()).isEqualTo(min);
      assertThat(b.max()).isEqualTo(max);
      assertThat(b.nonFinite()).isEqualTo(nonFinite);
      assertThat(b.last()).isEqualTo(v[to]);
      covered += b.count();
    }
    assertThat(covered).isEqualTo(n);
    assertThat(h.bucketWidth()).isEqualTo(64); // 1000 samples / 16 buckets -> next power of 2
  }

  @Test
  void aSingleSpikeSurvivesTenMillionSamplesInFlatMemory() {
    SeriesHistory h = new SeriesHistory(512);
    for (long i = 0; i < 10_000_000L; i++) {
      h.add(i, i == 6_543_210L ? 1e9 : 1.0 / (1 + i));
    }
    List<SeriesHistory.Bucket> bs = h.buckets();
    assertThat(bs.size()).isBetween(256, 512);
    assertThat(h.samples()).isEqualTo(10_000_000L);
    SeriesHistory.Bucket spike = bs.stream().filter(b -> b.firstStep() <= 6_543_210L
        && b.lastStep() >= 6_543_210L).findFirst().orElseThrow();
    assertThat(spike.max()).isEqualTo(1e9);
    assertThat(bs.get(0).max()).isEqualTo(1.0);
    assertThat(bs.get(bs.size() - 1).last()).isEqualTo(1.0 / 10_000_000L);
  }

  @Test
  void aBucketOfOnlyNonFiniteValuesHasNoMinOrMax() {
    SeriesHistory h = new SeriesHistory(2);
    h.add(1, Double.NaN);
    assertThat(h.buckets().get(0).min()).isNaN();
    assertThat(h.buckets().get(0).nonFinite()).isEqualTo(1);
  }

  @Test
  void refusesAnOddBucketCount() {
    assertThatThrownBy(() -> new SeriesHistory(3)).hasMessageContaining("even");
  }
}
