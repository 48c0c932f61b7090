package dev.stepwarden.metrics;

/** Turns one trainer line into key/value pairs. Implementations are not thread-safe. */
interface LineParser {
  /** Receives each numeric (or non-finite) field of a line. */
  interface Fields {
    void put(String key, double value);
  }

  /** Parses {@code line}; returns false when the line carries no metric at all. */
  boolean parse(String line, Fields out);

  /** Reads the common spellings of numbers, including non-finite ones; NaN-boxed null if not. */
  static Double number(String text) {
    String t = text.trim();
    if (t.isEmpty()) {
      return null;
    }
    switch (t.toLowerCase(java.util.Locale.ROOT)) {
      case "nan":
      case "+nan":
      case "-nan":
        return Double.NaN;
      case "inf":
      case "+inf":
      case "infinity":
      case "+infinity":
        return Double.POSITIVE_INFINITY;
      case "-inf":
      case "-infinity":
        return Double.NEGATIVE_INFINITY;
      default:
        break;
    }
    char c = t.charAt(0);
    if (!(c == '-' || c == '+' || c == '.' || (c >= '0' && c <= '9'))) {
      return null;
    }
    try {
      return Double.parseDouble(t);
    } catch (NumberFormatException e) {
      return null;
    }
  }
}
