package dev.stepwarden.detectors;

import java.util.Collections;
import java.util.LinkedHashMap;
import java.util.Map;
import java.util.Objects;

/**
 * Why a detector fired, in numbers: the audit log and the morning report print it verbatim.
 *
 * @param detector the detector's guard-file name (for example {@code flattens})
 * @param summary one plain sentence with the numbers in it
 * @param figures the window, statistic, p-value, best value and its step, ... in a stable order
 */
public record Evidence(String detector, String summary, Map<String, Object> figures) {
  public Evidence {
    Objects.requireNonNull(detector, "detector");
    Objects.requireNonNull(summary, "summary");
    figures = Collections.unmodifiableMap(new LinkedHashMap<>(figures));
  }
}
