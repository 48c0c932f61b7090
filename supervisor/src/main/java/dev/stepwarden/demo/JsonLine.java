package dev.stepwarden.demo;

import java.math.BigDecimal;
import java.math.MathContext;

/**
 * Builds one flat JSON object per line by hand (no library on the hot path). Non-finite numbers
 * are not valid JSON, so they go out as the strings {@code "nan"}, {@code "inf"} and {@code
 * "-inf"}: a reader keeps parsing and the supervisor decides what a NaN loss means.
 */
final class JsonLine {
  private static final MathContext SIGNIFICANT = new MathContext(6);
  private final StringBuilder sb = new StringBuilder(96).append('{');

  JsonLine put(String key, long value) {
    key(key).append(value);
    return this;
  }

  /** The exact shortest decimal of {@code value}: for rates, so the supervisor can compare them. */
  JsonLine putExact(String key, double value) {
    key(key);
    if (Double.isFinite(value)) {
      sb.append(Double.toString(value));
    } else {
      sb.append(nonFinite(value));
    }
    return this;
  }

  /** {@code value} rounded to 6 significant digits: for losses and accuracies. */
  JsonLine put(String key, double value) {
    key(key);
    if (Double.isFinite(value)) {
      sb.append(BigDecimal.valueOf(value).round(SIGNIFICANT).stripTrailingZeros().toString());
    } else {
      sb.append(nonFinite(value));
    }
    return this;
  }

  static String nonFinite(double value) {
    return Double.isNaN(value) ? "\"nan\"" : value > 0 ? "\"inf\"" : "\"-inf\"";
  }

  private StringBuilder key(String key) {
    if (sb.length() > 1) {
      sb.append(',');
    }
    return sb.append('"').append(key).append("\":");
  }

  @Override
  public String toString() {
    return sb + "}";
  }
}
