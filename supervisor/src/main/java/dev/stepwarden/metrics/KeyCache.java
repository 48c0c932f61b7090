package dev.stepwarden.metrics;

/**
 * Hands out one shared {@code String} per distinct key spelled in a char buffer, so that a trainer
 * printing the same dozen keys on every line costs no key allocation after the first line (and
 * the cached strings' hash codes are computed once). Bounded: once full, further keys are new
 * strings each time, so a line format with ever-changing keys cannot grow memory.
 */
final class KeyCache {
  private static final int SLOTS = 512; // power of two
  private static final int MAX_ENTRIES = SLOTS / 2;
  private static final int MAX_KEY = 128;

  private final String[] table = new String[SLOTS];
  private int entries;

  String get(char[] buf, int len) {
    if (len > MAX_KEY) {
      return new String(buf, 0, len);
    }
    int h = 0;
    for (int i = 0; i < len; i++) {
      h = 31 * h + buf[i];
    }
    int slot = mix(h) & (SLOTS - 1);
    while (true) {
      String s = table[slot];
      if (s == null) {
        String fresh = new String(buf, 0, len);
        if (entries < MAX_ENTRIES) {
          table[slot] = fresh;
          entries++;
        }
        return fresh;
      }
      if (s.length() == len && same(s, buf, len)) {
        return s;
      }
      slot = (slot + 1) & (SLOTS - 1);
    }
  }

  private static boolean same(String s, char[] buf, int len) {
    for (int i = 0; i < len; i++) {
      if (s.charAt(i) != buf[i]) {
        return false;
      }
    }
    return true;
  }

  private static int mix(int h) {
    return h ^ (h >>> 16);
  }
}
