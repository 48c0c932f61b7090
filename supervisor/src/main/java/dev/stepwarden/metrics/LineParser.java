package dev.stepwarden.metrics;

/** Turns one trainer line into key/value pairs. Implementations are not thread-safe. */
interface LineParser {
  /** Receives each numeric (or non-finite) field of a line. */
  interface Fields {
    void put(String key, double value);

    /**
     * A field whose number is printed in {@code text[from, to)} as a valid JSON number (RFC 8259
     * s. 6); the bytes are valid only during the call's line.
     */
    default void put(String key, double value, byte[] text, int from, int to) {
      put(key, value);
    }
  }

  /** Parses {@code line}; returns false when the line carries no metric at all. */
  boolean parse(String line, Fields out);

  /** Parses the UTF-8 line {@code b[off, off+len)}; by default via a decoded string. */
  default boolean parse(byte[] b, int off, int len, Fields out) {
    return parse(new String(b, off, len, java.nio.charset.StandardCharsets.UTF_8), out);
  }

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
