package dev.stepwarden.metrics;

import java.nio.charset.StandardCharsets;
import java.util.Arrays;

/**
 * Hands out one shared {@code String} per distinct key spelled in a UTF-8 byte buffer, so that a
 * trainer printing the same dozen keys on every line costs no key allocation after the first line
 * (and the cached strings' hash codes are computed once). Bounded: once full, further keys are new
 * strings each time, so a line format with ever-changing keys cannot grow memory.
 */
final class KeyCache {
  private static final int SLOTS = 512; // power of two
  private static final int MAX_ENTRIES = SLOTS / 2;
  private static final int MAX_KEY = 128;

  private final String[] table = new String[SLOTS];
  private final byte[][] spelled = new byte[SLOTS][];
  private int entries;

  /** The key spelled by {@code buf[0, len)} as chars (quoted CSV cells). */
  String get(char[] buf, int len) {
    byte[] b = new String(buf, 0, len).getBytes(StandardCharsets.UTF_8);
    return get(b, b.length);
  }

  String get(byte[] buf, int len) {
    if (len > MAX_KEY) {
      return new String(buf, 0, len, StandardCharsets.UTF_8);
    }
    int h = 0;
    for (int i = 0; i < len; i++) {
      h = 31 * h + buf[i];
    }
    int slot = mix(h) & (SLOTS - 1);
    while (true) {
      byte[] s = spelled[slot];
      if (s == null) {
        String fresh = new String(buf, 0, len, StandardCharsets.UTF_8);
        if (entries < MAX_ENTRIES) {
          table[slot] = fresh;
          spelled[slot] = Arrays.copyOf(buf, len);
          entries++;
        }
        return fresh;
      }
      if (s.length == len && Arrays.equals(s, 0, len, buf, 0, len)) {
        return table[slot];
      }
      slot = (slot + 1) & (SLOTS - 1);
    }
  }

  private static int mix(int h) {
    return h ^ (h >>> 16);
  }
}
