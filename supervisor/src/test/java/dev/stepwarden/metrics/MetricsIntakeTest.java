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
    // A rewind to a checkpoint seen at step 50: the counted axis goes back with the trainer.
    in.continueAfter(50);
    assertThat(in.lastStep()).isEqualTo(50);
    assertThat(in.accept("{\"loss\": 1}", 0).sample().step()).isEqualTo(51);
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

  @Test
  void readingFromThePumpsBytesGivesTheSameSamplesAsReadingStrings() {
    String[] lines = {
        "{\"step\": 7, \"epoch\": 1, \"loss\": 0.30000000000000004, \"lr\": 1e-3}",
        "{\"step\": 8, \"val\": {\"loss\": \"nan\"}, \"loss\": 2.5e-1}",
        "{\"st\u00e9p\": 1, \"r\u00e9sum\u00e9\": 2, \"loss\": -0.0}",
        "Traceback (most recent call last):",
        "{\"r\\u00e9sum\\u00e9\": 3, \"\\ud83d\\ude00\": 4, \"loss\": 1}",
        "{\"step\": 9, \"loss\": 1.7976931348623157e308, \"applied_revision\": 3}"};
    MetricsIntake a = new MetricsIntake(json(ordered("train", "loss", "validation", "val.loss")));
    MetricsIntake b = new MetricsIntake(json(ordered("train", "loss", "validation", "val.loss")));
    for (String line : lines) {
      MetricsIntake.Reading fromString = a.accept(line, 5L);
      byte[] bytes = ("  " + line + "  ").getBytes(java.nio.charset.StandardCharsets.UTF_8);
      MetricsIntake.Reading fromBytes = b.accept(bytes, 2, bytes.length - 4, 5L, false);
      assertThat(fromBytes).as(line).isEqualTo(fromString);
    }
    assertThat(b.lines()).isEqualTo(a.lines());
    assertThat(b.ignoredLines()).isEqualTo(a.ignoredLines()).isEqualTo(1);
    assertThat(b.keysSeen()).isEqualTo(a.keysSeen())
        .contains("r\u00e9sum\u00e9", "st\u00e9p", "\ud83d\ude00");
  }

  @Test
  void theNumberTextAsPrintedIsOfferedOnlyWhenItIsValidJson() {
    MetricsIntake in = new MetricsIntake(json(ordered("train", "loss", "validation", "acc")));
    in.accept("{\"step\": 1, \"loss\": 0.2500, \"acc\": 1E+2}", 0L);
    StringBuilder out = new StringBuilder();
    assertThat(in.appendPrinted("train", out)).isTrue();
    assertThat(in.appendPrinted("validation", out.append('|'))).isTrue();
    assertThat(out).hasToString("0.2500|1E+2");
    // RFC 8259 s. 6 has no leading '+', bare '.5', or NaN: the caller formats those itself
    in.accept("{\"step\": 2, \"loss\": NaN, \"acc\": 5}", 0L);
    assertThat(in.appendPrinted("train", new StringBuilder())).isFalse();
    MetricsIntake pairs = new MetricsIntake(new ReadPlan(ReadPlan.Source.STDOUT, null,
        ReadPlan.Format.PAIRS, null, "step", null, null, Map.of("train", "loss")));
    pairs.accept("step=3 loss=.5", 0L);
    assertThat(pairs.appendPrinted("train", new StringBuilder())).isFalse();
    // a series the line did not carry
    in.accept("{\"step\": 3, \"acc\": 5}", 0L);
    assertThat(in.appendPrinted("train", new StringBuilder())).isFalse();
  }

  @Test
  void jsonNumberGrammarFollowsRfc8259() {
    // RFC 8259 s. 6: number = [ minus ] int [ frac ] [ exp ]; int = zero / ( digit1-9 *DIGIT )
    for (String ok : new String[] {"0", "-0", "12", "0.5", "-1.25e-3", "1E+2", "6.02e23"}) {
      byte[] b = ok.getBytes(java.nio.charset.StandardCharsets.US_ASCII);
      assertThat(JsonLineParser.plainJson(b, 0, b.length)).as(ok).isTrue();
    }
    for (String bad : new String[] {"+1", ".5", "1.", "01", "1e", "-", "1e+", "--1", "0x10"}) {
      byte[] b = bad.getBytes(java.nio.charset.StandardCharsets.US_ASCII);
      assertThat(JsonLineParser.plainJson(b, 0, b.length)).as(bad).isFalse();
    }
  }
}
