package dev.stepwarden.rules;

import com.code_intelligence.jazzer.junit.FuzzTest;
import java.nio.file.Path;

/**
 * Fuzz target for the guard loader: any bytes either load or are refused with a
 * {@link ConfigException}; nothing else may escape (a Jazzer finding). Seeds in
 * {@code GuardFilesFuzzTestInputs/}; {@code JAZZER_FUZZ=1} fuzzes for up to 60 s.
 */
class GuardFilesFuzzTest {
  @FuzzTest(maxDuration = "60s")
  void onlyConfigExceptionEscapesTheLoader(byte[] yaml) {
    try {
      GuardFiles.parse(yaml, Path.of("fuzz.yaml"));
    } catch (ConfigException expected) {
      // a refusal with its place: the one allowed outcome besides a loaded file
    }
  }
}
