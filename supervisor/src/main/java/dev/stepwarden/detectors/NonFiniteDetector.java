package dev.stepwarden.detectors;

import java.util.LinkedHashMap;
import java.util.Map;
import java.util.Optional;

/**
 * Fires on every NaN or infinite value: a loss of NaN or +Infinity means the run has diverged and
 * no amount of smoothing will bring it back. Stateless; the other detectors ignore such values and
 * leave them to this one.
 *
 * <p>Figures: {@code step}, {@code value} (as the string NaN, Infinity or -Infinity).
 */
final class NonFiniteDetector implements Detector {
  static final String NAME = "breaks";

  private final String series;

  NonFiniteDetector() {
    this("series");
  }

  NonFiniteDetector(String series) {
    this.series = Figures.series(series);
  }

  @Override
  public Optional<Evidence> offer(long step, double value) {
    if (Double.isFinite(value)) {
      return Optional.empty();
    }
    Map<String, Object> figures = new LinkedHashMap<>();
    figures.put("step", step);
    figures.put("value", Double.toString(value));
    String what = Double.isNaN(value) ? "NaN" : (value > 0 ? "+Infinity" : "-Infinity");
    return Optional.of(
        new Evidence(NAME, series + " is " + what + " at step " + step + ".", figures));
  }

  @Override
  public void reset() {
    // nothing to forget
  }
}
