package dev.stepwarden.supervise;

import static org.assertj.core.api.Assertions.assertThat;

import dev.stepwarden.metrics.MetricsSources;
import dev.stepwarden.metrics.ReadPlan;
import dev.stepwarden.metrics.Sample;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.LinkedHashMap;
import java.util.List;
import java.util.Map;
import net.jqwik.api.ForAll;
import net.jqwik.api.Property;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;
import tools.jackson.databind.JsonNode;
import tools.jackson.databind.json.JsonMapper;

/**
 * The byte-level normalized writer, read back with Jackson (a general-purpose JSON library) as
 * the reference: every line is valid JSON and every number reads back to the same double.
 */
class NormalizedWriterTest {
  private static final JsonMapper JSON = JsonMapper.builder().build();

  @TempDir Path dir;

  private List<String> written(Sample... samples) throws Exception {
    Path f = Files.createFile(dir.resolve("m" + System.nanoTime() + ".jsonl"));
    try (NormalizedWriter w = NormalizedWriter.append(f)) {
      for (Sample s : samples) {
        w.write(s, 0.001, null);
      }
    }
    return Files.readAllLines(f, StandardCharsets.UTF_8);
  }

  private static Sample sample(long step, double epoch, Object... nameValue) {
    Map<String, Double> m = new LinkedHashMap<>();
    for (int i = 0; i < nameValue.length; i += 2) {
      m.put((String) nameValue[i], (Double) nameValue[i + 1]);
    }
    return new Sample(step, epoch, 1_700_000_000_123L, m);
  }

  @Test
  void writesStepEpochTimeRateAndSeriesInOrderWithNonFiniteAsStrings() throws Exception {
    List<String> lines = written(
        sample(42, 3.0, "train", 0.5, "validation", Double.NaN),
        sample(-7, Double.NaN, "train", Double.POSITIVE_INFINITY, "validation",
            Double.NEGATIVE_INFINITY));
    assertThat(lines).containsExactly(
        "{\"step\":42,\"epoch\":3.0,\"t\":1700000000123,\"lr\":0.001,\"train\":0.5,"
            + "\"validation\":\"nan\"}",
        "{\"step\":-7,\"t\":1700000000123,\"lr\":0.001,\"train\":\"inf\","
            + "\"validation\":\"-inf\"}");
  }

  @Test
  void seriesNamesAreEscapedAsJsonStrings() throws Exception {
    String line = written(sample(1, Double.NaN, "odd \"name\"\\\t", 1.0)).get(0);
    JsonNode n = JSON.readTree(line);
    assertThat(n.get("odd \"name\"\\\t").asDouble()).isEqualTo(1.0);
  }

  @Test
  void extremeStepsAndHugeEpochsStayValidJson() throws Exception {
    List<String> lines = written(sample(Long.MIN_VALUE, 1e300, "train", -0.0),
        sample(Long.MAX_VALUE, 12_345_678.0, "train", 4.9e-324));
    assertThat(JSON.readTree(lines.get(0)).get("step").asLong()).isEqualTo(Long.MIN_VALUE);
    assertThat(JSON.readTree(lines.get(0)).get("epoch").asDouble()).isEqualTo(1e300);
    assertThat(JSON.readTree(lines.get(0)).get("train").asDouble()).isEqualTo(-0.0);
    assertThat(JSON.readTree(lines.get(1)).get("step").asLong()).isEqualTo(Long.MAX_VALUE);
    assertThat(JSON.readTree(lines.get(1)).get("train").asDouble()).isEqualTo(4.9e-324);
  }

  @Property(tries = 300)
  void everyFiniteValueAndStepReadsBackExactly(@ForAll long step, @ForAll double value,
      @ForAll double epoch) throws Exception {
    if (!Double.isFinite(value) || !Double.isFinite(epoch)) {
      return; // non-finite values have their own spelling, checked above
    }
    Path f = Files.createTempFile("normalized", ".jsonl");
    try {
      try (NormalizedWriter w = NormalizedWriter.append(f)) {
        w.write(sample(step, epoch, "train", value), 3e-4, null);
      }
      JsonNode n = JSON.readTree(Files.readString(f, StandardCharsets.UTF_8));
      assertThat(n.get("step").asLong()).isEqualTo(step);
      assertThat(Double.doubleToRawLongBits(n.get("train").asDouble()))
          .isEqualTo(Double.doubleToRawLongBits(value));
      assertThat(n.get("epoch").asDouble()).isEqualTo(epoch);
      assertThat(n.get("lr").asDouble()).isEqualTo(3e-4);
    } finally {
      Files.deleteIfExists(f);
    }
  }

  @Property(tries = 200)
  void countedUpStepsAndJumpsAreWrittenAsTheirDecimalDigits(
      @ForAll @net.jqwik.api.constraints.LongRange(min = 0, max = 2_000_000) long start,
      @ForAll @net.jqwik.api.constraints.IntRange(min = 1, max = 1200) int run,
      @ForAll @net.jqwik.api.constraints.LongRange(min = -5, max = Long.MAX_VALUE) long jump)
      throws Exception {
    // Runs of consecutive steps cross 9 -> 10, 99 -> 100 and so on; then a jump anywhere
    // (back, forward, negative) and one more step.
    long[] steps = new long[run + 2];
    for (int i = 0; i < run; i++) {
      steps[i] = start + i;
    }
    steps[run] = jump;
    steps[run + 1] = jump == Long.MAX_VALUE ? 0 : jump + 1;
    Path f = Files.createTempFile("steps", ".jsonl");
    try {
      try (NormalizedWriter w = NormalizedWriter.append(f)) {
        for (long st : steps) {
          w.write(sample(st, Double.NaN, "train", 1.0), 0.1, null);
        }
      }
      List<String> lines = Files.readAllLines(f, StandardCharsets.UTF_8);
      assertThat(lines).hasSize(steps.length);
      for (int i = 0; i < steps.length; i++) {
        assertThat(lines.get(i)).startsWith("{\"step\":" + steps[i] + ",");
      }
    } finally {
      Files.deleteIfExists(f);
    }
  }

  @Property(tries = 200)
  void epochsRepeatedChangedAndAbsentAreEachWrittenAsTheirOwnValue(
      @ForAll("epochs") List<Double> epochs) throws Exception {
    // the writer keeps the last epoch's text: a repeat, a change, a missing epoch and the
    // signed zeros must each come out as that line's own value
    Sample[] s = new Sample[epochs.size()];
    for (int i = 0; i < s.length; i++) {
      s[i] = sample(i, epochs.get(i), "train", 1.0);
    }
    Path f = Files.createTempFile("epochs", ".jsonl"); // a property gets no @TempDir
    List<String> lines;
    try {
      try (NormalizedWriter w = NormalizedWriter.append(f)) {
        for (Sample x : s) {
          w.write(x, 0.001, null);
        }
      }
      lines = Files.readAllLines(f, StandardCharsets.UTF_8);
    } finally {
      Files.deleteIfExists(f);
    }
    assertThat(lines).hasSize(s.length);
    for (int i = 0; i < s.length; i++) {
      JsonNode n = JSON.readTree(lines.get(i));
      double e = epochs.get(i);
      if (Double.isNaN(e)) {
        assertThat(n.has("epoch")).as(lines.get(i)).isFalse();
      } else {
        assertThat(Double.doubleToRawLongBits(n.get("epoch").asDouble())).as(lines.get(i))
            .isEqualTo(Double.doubleToRawLongBits(e));
      }
    }
  }

  @net.jqwik.api.Provide
  net.jqwik.api.Arbitrary<List<Double>> epochs() {
    return net.jqwik.api.Arbitraries.of(0.0, -0.0, 1.0, 2.0, 0.5, 2.25, 1e300, Double.NaN,
        1234567.0, 12345678.0).list().ofMaxSize(30);
  }

  @Test
  void stepsCountingPastEveryPowerOfTenKeepTheirDigits() throws Exception {
    Sample[] s = new Sample[1200];
    for (int i = 0; i < s.length; i++) {
      s[i] = sample(i, Double.NaN, "train", 1.0, "validation", 2.0);
    }
    List<String> lines = written(s);
    for (int i = 0; i < s.length; i++) {
      assertThat(lines.get(i)).isEqualTo("{\"step\":" + i + ",\"t\":1700000000123,\"lr\":0.001,"
          + "\"train\":1.0,\"validation\":2.0}");
    }
  }

  @Test
  void aValuePrintedAsValidJsonIsCopiedAsPrinted() throws Exception {
    MetricsSources sources = new MetricsSources(new ReadPlan(ReadPlan.Source.STDOUT, null,
        ReadPlan.Format.JSON, null, "step", "epoch", "lr", Map.of("train", "loss")));
    byte[] line = "{\"step\": 5, \"loss\": 1.50E-3}".getBytes(StandardCharsets.UTF_8);
    Sample s = sources.accept(0, line, 0, line.length, 99L, false).sample();
    Path f = Files.createFile(dir.resolve("printed.jsonl"));
    try (NormalizedWriter w = NormalizedWriter.append(f)) {
      w.write(s, 0.1, SamplePath.printedOf(sources, 0));
    }
    assertThat(Files.readString(f, StandardCharsets.UTF_8))
        .isEqualTo("{\"step\":5,\"t\":99,\"lr\":0.1,\"train\":1.50E-3}\n");
  }

  @Test
  void manyLinesCrossTheBufferAndAllArrive() throws Exception {
    Sample[] many = new Sample[20_000];
    for (int i = 0; i < many.length; i++) {
      many[i] = sample(i, i / 1000, "train", 1.0 / (i + 1));
    }
    List<String> lines = written(many);
    assertThat(lines).hasSize(many.length);
    for (int i = 0; i < many.length; i += 997) {
      JsonNode n = JSON.readTree(lines.get(i));
      assertThat(n.get("step").asLong()).isEqualTo(i);
      assertThat(n.get("train").asDouble()).isEqualTo(1.0 / (i + 1));
    }
  }
}
