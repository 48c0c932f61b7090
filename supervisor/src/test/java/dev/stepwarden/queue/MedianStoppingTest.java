package dev.stepwarden.queue;

import static org.assertj.core.api.Assertions.assertThat;

import dev.stepwarden.metrics.Sample;
import dev.stepwarden.supervise.RunObserver;
import java.util.ArrayList;
import java.util.List;
import java.util.Map;
import java.util.Optional;
import org.junit.jupiter.api.Test;

/**
 * The rule of Golovin et al. 2017 ("Google Vizier", s3.2): stop a pending trial at step s when its
 * best objective by s is strictly worse than the median of the completed trials' running averages
 * up to s. The curves are invented, in a scenario of our own; the medians are worked by hand.
 */
class MedianStoppingTest {
  static MedianStopping.Curve curve(String name, double... values) {
    long[] steps = new long[values.length];
    for (int i = 0; i < values.length; i++) {
      steps[i] = i + 1;
    }
    return new MedianStopping.Curve(name, steps, values);
  }

  final List<MedianStopping.Curve> done = List.of(
      curve("a", 1.0, 0.8, 0.6, 0.5),
      curve("b", 1.2, 1.0, 0.9, 0.8),
      curve("c", 0.9, 0.7, 0.5, 0.4));

  @Test
  void stopsARunWhoseBestIsWorseThanTheMedianOfRunningAverages() {
    // running averages at step 2: a (1.0+0.8)/2 = 0.9, b 1.1, c 0.8 -> median 0.9
    Optional<MedianStopping.Verdict> v = MedianStopping.judge(2, 0.95, done, 3);
    assertThat(v).isPresent();
    assertThat(v.get().median()).isCloseTo(0.9, org.assertj.core.data.Offset.offset(1e-12));
    assertThat(v.get().averages()).containsEntry("b", 1.1);
    assertThat(v.get().summary()).contains("by step 2").contains("3 completed runs");
  }

  @Test
  void keepsARunThatOnlyTiesTheMedianBecauseTheRuleAsksForStrictlyWorse() {
    assertThat(MedianStopping.judge(2, 0.9, done, 3)).isEmpty();
    assertThat(MedianStopping.judge(2, 0.85, done, 3)).isEmpty();
  }

  @Test
  void usesOnlyValuesUpToTheStepAndAnEvenCountTakesTheMiddlePair() {
    // step 4 with a and c only: averages a (1.0+0.8+0.6+0.5)/4 = 0.725, c 0.625 -> median 0.675
    List<MedianStopping.Curve> two = List.of(done.get(0), done.get(2));
    assertThat(MedianStopping.judge(4, 0.7, two, 2).orElseThrow().median())
        .isCloseTo(0.675, org.assertj.core.data.Offset.offset(1e-12));
    assertThat(MedianStopping.judge(4, 0.67, two, 2)).isEmpty();
  }

  @Test
  void staysSilentUntilEnoughCompletedRunsReportedByThatStep() {
    assertThat(MedianStopping.judge(2, 5.0, done.subList(0, 2), 3)).isEmpty();
    MedianStopping.Curve late = new MedianStopping.Curve("late", new long[] {10}, new double[] {
        0.1});
    assertThat(MedianStopping.judge(2, 5.0, List.of(done.get(0), done.get(1), late), 3))
        .as("a run with no value by step 2 does not count").isEmpty();
  }

  @Test
  void theObserverTracksTheBestSoFarAndFiresOnce() {
    List<MedianStopping.Verdict> fired = new ArrayList<>();
    RunObserver o = MedianStopping.observer("validation", done, 3, 0, fired::add);
    o.onSample(new Sample(1, Double.NaN, 0, Map.of("validation", 0.85)), 0.1); // median 1.0: keep
    o.onSample(new Sample(2, Double.NaN, 0, Map.of("train", 9.0)), 0.1); // another series
    assertThat(fired).isEmpty();
    // best by step 3 stays 0.85; averages a 0.8, b 1.033, c 0.7 -> median 0.8 < 0.85: stop
    o.onSample(new Sample(3, Double.NaN, 0, Map.of("validation", 0.95)), 0.1);
    o.onSample(new Sample(4, Double.NaN, 0, Map.of("validation", 0.99)), 0.1);
    assertThat(fired).hasSize(1);
    assertThat(fired.get(0).step()).isEqualTo(3);
    assertThat(fired.get(0).best()).isEqualTo(0.85);
  }
}
