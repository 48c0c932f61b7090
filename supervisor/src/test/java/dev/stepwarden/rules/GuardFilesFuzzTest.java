package dev.stepwarden.rules;

import com.code_intelligence.jazzer.junit.FuzzTest;
import dev.stepwarden.engine.Decision;
import dev.stepwarden.engine.GuardEngine;
import dev.stepwarden.metrics.Sample;
import java.nio.file.Path;
import java.util.HashMap;
import java.util.Map;

/**
 * Fuzz target for the guard file, past the parser: any bytes either load, arm an engine, explain
 * themselves and take a few samples, or are refused with a {@link ConfigException}; nothing else
 * may escape (a Jazzer finding). What {@code check} accepts, {@code run} and {@code replay} must
 * accept too. Seeds in {@code GuardFilesFuzzTestInputs/}; {@code JAZZER_FUZZ=1} fuzzes for up to
 * 60 s.
 */
class GuardFilesFuzzTest {
  @FuzzTest(maxDuration = "60s")
  void onlyConfigExceptionEscapesTheLoaderTheEngineOrTheExplanation(byte[] yaml) {
    GuardFile file;
    try {
      file = GuardFiles.parse(yaml, Path.of("fuzz.yaml"));
    } catch (ConfigException expected) {
      return; // a refusal with its place: the one allowed outcome besides a working file
    }
    Explain.describe(file);
    GuardEngine engine = new GuardEngine(file);
    for (int i = 0; i < 12; i++) {
      Map<String, Double> values = new HashMap<>();
      for (String series : file.read().allSeries().keySet()) {
        values.put(series, i == 9 ? Double.NaN : 1.0 / (1 + i));
      }
      if (engine.onSample(new Sample(i, Double.NaN, i, values)).filter(d -> d.ending()
          != Decision.Ending.CONTINUE).isPresent()) {
        break;
      }
    }
  }
}
