package dev.stepwarden.metrics;

import com.code_intelligence.jazzer.api.FuzzedDataProvider;
import com.code_intelligence.jazzer.junit.FuzzTest;
import java.util.LinkedHashMap;
import java.util.Map;
import java.util.regex.Pattern;

/**
 * Fuzz targets for the line parsers: whatever a trainer prints, {@link MetricsIntake#accept}
 * returns a reading or null and throws nothing. In a normal build Jazzer replays the seeds in
 * {@code LineParsersFuzzTestInputs/}; {@code JAZZER_FUZZ=1} fuzzes each target for up to 60 s
 * (DEVELOPERS.md, "Faults and hostile input").
 */
class LineParsersFuzzTest {
  private static ReadPlan plan(ReadPlan.Format format) {
    Map<String, String> series = new LinkedHashMap<>();
    series.put("train", "loss");
    series.put("validation", "val_loss");
    Pattern p = format == ReadPlan.Format.PATTERN
        ? Pattern.compile("step[= ](?<step>\\S+).*?loss[= ](?<loss>\\S+)(.*val_loss[= ]"
            + "(?<valloss>\\S+))?")
        : null;
    if (p != null) {
      series.put("validation", "valloss");
    }
    return new ReadPlan(ReadPlan.Source.STDOUT, null, format, p, "step", "epoch", "lr", series);
  }

  /** Feeds several lines to one intake so state (step axis, CSV header) is exercised too. */
  private static void feed(ReadPlan.Format format, FuzzedDataProvider data) {
    MetricsIntake in = new MetricsIntake(plan(format));
    while (data.remainingBytes() > 0) {
      in.accept(data.consumeString(4096), data.consumeLong(), data.consumeBoolean());
    }
  }

  @FuzzTest(maxDuration = "60s")
  void jsonLinesNeverThrow(FuzzedDataProvider data) {
    feed(ReadPlan.Format.JSON, data);
  }

  @FuzzTest(maxDuration = "60s")
  void pairsLinesNeverThrow(FuzzedDataProvider data) {
    feed(ReadPlan.Format.PAIRS, data);
  }

  @FuzzTest(maxDuration = "60s")
  void patternLinesNeverThrow(FuzzedDataProvider data) {
    feed(ReadPlan.Format.PATTERN, data);
  }

  @FuzzTest(maxDuration = "60s")
  void csvLinesNeverThrow(FuzzedDataProvider data) {
    feed(ReadPlan.Format.CSV, data);
  }
}
