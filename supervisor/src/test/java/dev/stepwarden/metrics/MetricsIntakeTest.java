package dev.stepwarden.metrics;

import static org.assertj.core.api.Assertions.assertThat;

import java.util.Map;
import org.junit.jupiter.api.Test;

class MetricsIntakeTest {
  private static ReadPlan json(Map<String, String> series) {
    return new ReadPlan(ReadPlan.Source.STDOUT, null, ReadPlan.Format.JSON, null, "step", "epoch",
        "lr", series);
  }

  private static Map<String, String> ordered(String... kv) {
    Map<String, String> m = new java.util.LinkedHashMap<>();
    for (int i = 0; i < kv.length; i += 2) {
      m.put(kv[i], kv[i + 1]);
    }
    return m;
  }

  @Test
  void picksStepEpochRateAndTheConfiguredSeriesOutOfALine() {
    MetricsIntake in = new MetricsIntake(json(ordered("train", "loss", "validation", "val.loss")));
    MetricsIntake.Reading r = in.accept("{\"step\": 40, \"epoch\": 2, \"lr\": 0.05, \"loss\":"
        + " 0.7, \"val\": {\"loss\": 0.9}, \"acc\": 0.6}", 123);
    assertThat(r.sample().step()).isEqualTo(40);
    assertThat(r.sample().epoch()).isEqualTo(2.0);
    assertThat(r.sample().wallMillis()).isEqualTo(123);
    assertThat(r.sample().values()).containsExactly(Map.entry("train", 0.7),
        Map.entry("validation", 0.9));
    assertThat(r.reportedRate()).isEqualTo(0.05);
    assertThat(r.hasRevision()).isFalse();
  }

  @Test
  void countsStepsWhenTheTrainerPrintsNoneAndContinuesAfterARestart() {
    MetricsIntake in = new MetricsIntake(json(Map.of("train", "loss")));
    assertThat(in.accept("{\"loss\": 1}", 0).sample().step()).isEqualTo(1);
    assertThat(in.accept("{\"loss\": 1}", 0).sample().step()).isEqualTo(2);
    in.continueAfter(100);
    assertThat(in.accept("{\"loss\": 1}", 0).sample().step()).isEqualTo(101);
    assertThat(in.lastStep()).isEqualTo(101);
  }

  @Test
  void aLineWithOnlyTheRateOrRevisionIsIgnoredButStillReported() {
    MetricsIntake in = new MetricsIntake(json(Map.of("train", "loss")));
    MetricsIntake.Reading r = in.accept("{\"lr\": 0.01, \"applied_revision\": 4}", 0);
    assertThat(r.sample()).isNull();
    assertThat(r.reportedRate()).isEqualTo(0.01);
    assertThat(r.appliedRevision()).isEqualTo(4);
    assertThat(in.ignoredLines()).isEqualTo(1);
    assertThat(in.accept("  0%|          | 0/100 [00:00<?, ?it/s]", 0)).isNull();
    assertThat(in.ignoredLines()).isEqualTo(2);
    assertThat(in.lines()).isEqualTo(2);
    // values of an earlier line never leak into a later one
    assertThat(in.accept("{\"loss\": 0.3}", 0).hasRate()).isFalse();
  }

  @Test
  void aKeyCanBeBothTheStepAndASeries() {
    MetricsIntake in = new MetricsIntake(json(Map.of("progress", "step")));
    Sample s = in.accept("{\"step\": 7}", 0).sample();
    assertThat(s.step()).isEqualTo(7);
    assertThat(s.value("progress")).isEqualTo(7.0);
  }

  @Test
  void readsNonFiniteLossesAsValuesNotErrors() {
    MetricsIntake in = new MetricsIntake(json(Map.of("train", "loss")));
    assertThat(in.accept("{\"step\": 3, \"loss\": NaN}", 0).sample().value("train")).isNaN();
    assertThat(in.accept("{\"step\": 4, \"loss\": \"inf\"}", 0).sample().value("train"))
        .isEqualTo(Double.POSITIVE_INFINITY);
    assertThat(in.missingSeries()).isEmpty();
    assertThat(in.keysSeen()).containsExactly("loss", "step");
  }
}
