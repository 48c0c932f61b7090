package dev.stepwarden.detectors;

import java.math.BigDecimal;
import java.math.MathContext;
import java.util.Locale;

/**
 * How detectors write numbers: into evidence figures (JSON-safe: non-finite doubles become the
 * strings {@code NaN}, {@code Infinity}, {@code -Infinity}) and into summary sentences (four
 * significant digits, plain notation, no locale surprises).
 */
final class Figures {
  private Figures() {}

  /** A figure value that every JSON writer accepts. */
  static Object of(double v) {
    return Double.isFinite(v) ? (Object) v : Double.toString(v);
  }

  /** Four significant digits, trailing zeros dropped: 0.41204 -> "0.412", 1234.56 -> "1235". */
  static String num(double v) {
    if (!Double.isFinite(v)) {
      return Double.toString(v);
    }
    if (v == 0) {
      return "0";
    }
    double a = Math.abs(v);
    if (a < 1e-4 || a >= 1e7) {
      return String.format(Locale.ROOT, "%.3e", v);
    }
    return new BigDecimal(v).round(new MathContext(4)).stripTrailingZeros().toPlainString();
  }

  /** A p-value as people read it: two significant digits, and "< 0.0001" below that. */
  static String p(double p) {
    if (p < 1e-4) {
      return "< 0.0001";
    }
    return "= " + new BigDecimal(p).round(new MathContext(2)).stripTrailingZeros().toPlainString();
  }

  /** A fraction as a percentage with up to three significant digits: 0.005 -> "0.5 %". */
  static String percent(double fraction) {
    if (!Double.isFinite(fraction)) {
      return Double.toString(fraction) + " %";
    }
    if (fraction == 0) {
      return "0 %";
    }
    return new BigDecimal(fraction * 100).round(new MathContext(3)).stripTrailingZeros()
            .toPlainString()
        + " %";
  }

  /** Rejects a blank series label early, naming the parameter. */
  static String series(String series) {
    if (series == null || series.isBlank()) {
      throw new IllegalArgumentException("series name must not be blank, got '" + series + "'");
    }
    return series;
  }
}
