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

    /**
     * A field whose key the parser also names by a small id {@code id} ({@code 0 <=} id {@code <}
     * {@link KeyCache#MAX_ENTRIES}; for one parser the same id always means the same key), so a
     * receiver can look its use of the key up in an array. {@code text} is null (and {@code
     * from}, {@code to} are -1) when the number is not printed as valid JSON.
     */
    default void put(int id, String key, double value, byte[] text, int from, int to) {
      if (text == null) {
        put(key, value);
      } else {
        put(key, value, text, from, to);
      }
    }

    /**
     * Whether the value of key {@code id} is needed now. When false the parser still checks the
     * number (a malformed one ends the line as ever) but need neither convert it nor call put.
     * Asked only of a parser that hands out ids.
     */
    default boolean wants(int id) {
      return true;
    }

    /**
     * A value the parser passed over because it cannot be read one way only, such as {@code
     * loss=1,234.5} (a thousands separator, or the value 1 and a stray 234.5?).
     */
    default void ambiguous(String key) {}
  }

  /** Parses {@code line}; returns false when the line carries no metric at all. */
  boolean parse(String line, Fields out);

  /** Parses the UTF-8 line {@code b[off, off+len)}; by default via a decoded string. */
  default boolean parse(byte[] b, int off, int len, Fields out) {
    return parse(new String(b, off, len, java.nio.charset.StandardCharsets.UTF_8), out);
  }
}
