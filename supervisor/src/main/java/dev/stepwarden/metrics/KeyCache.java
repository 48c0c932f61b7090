package dev.stepwarden.metrics;

import java.nio.charset.StandardCharsets;

/**
 * Hands out one shared {@code String} and a small int id per distinct key spelled in a UTF-8 byte
 * buffer, so that a trainer printing the same dozen keys on every line costs no key allocation
 * after the first line, and a receiver can find what it does with a key through an array indexed
 * by the id instead of a hash map. Ids are dense ({@code 0 .. MAX_ENTRIES-1}, in order of first
 * sighting) and never reused: an entry is never evicted. Bounded: once full, further keys get no
 * id and are new strings each time, so a line format with ever-changing keys cannot grow memory.
 */
final class KeyCache {
  private static final int SLOTS = 512; // power of two
  /** The number of ids handed out at most. */
  static final int MAX_ENTRIES = SLOTS / 2;
  private static final int MAX_KEY = 128;

  private final byte[][] spelled = new byte[SLOTS][];
  private final int[] hashes = new int[SLOTS];
  private final int[] ids = new int[SLOTS];
  private final String[] keys = new String[MAX_ENTRIES];
  private final byte[][] spellingOf = new byte[MAX_ENTRIES][];
  private final int[] hashOf = new int[MAX_ENTRIES];
  /**
   * By id, for keys of up to 7 bytes: the key and its closing quote as {@link
   * Decimals#eightBytes} reads them, and the mask of those bytes (0 for longer keys).
   */
  private final long[] quoted = new long[MAX_ENTRIES];
  private final long[] quotedMask = new long[MAX_ENTRIES];
  private int entries;

  /** The hash {@link #id} expects: {@code h = 31 h + b} over the (signed) bytes. */
  static int hash(byte[] b, int from, int len) {
    int h = 0;
    for (int i = from; i < from + len; i++) {
      h = 31 * h + b[i];
    }
    return h;
  }

  /** The key spelled by {@code buf[0, len)} as chars (quoted CSV cells). */
  String get(char[] buf, int len) {
    byte[] b = new String(buf, 0, len).getBytes(StandardCharsets.UTF_8);
    return get(b, b.length);
  }

  String get(byte[] buf, int len) {
    int id = id(buf, 0, len, hash(buf, 0, len));
    return id >= 0 ? keys[id] : new String(buf, 0, len, StandardCharsets.UTF_8);
  }

  /**
   * The id of the key spelled by {@code buf[from, from+len)}, whose {@link #hash} is {@code h};
   * a new key is entered. -1 when the key is too long or the cache is full.
   */
  int id(byte[] buf, int from, int len, int h) {
    if (len > MAX_KEY) {
      return -1;
    }
    int slot = mix(h) & (SLOTS - 1);
    while (true) {
      byte[] s = spelled[slot];
      if (s == null) {
        if (entries >= MAX_ENTRIES) {
          return -1;
        }
        byte[] copy = java.util.Arrays.copyOfRange(buf, from, from + len);
        spelled[slot] = copy;
        hashes[slot] = h;
        ids[slot] = entries;
        keys[entries] = new String(buf, from, len, StandardCharsets.UTF_8);
        spellingOf[entries] = copy;
        hashOf[entries] = h;
        if (len < 8) {
          byte[] q = java.util.Arrays.copyOf(copy, 8);
          q[len] = '"';
          quoted[entries] = Decimals.eightBytes(q, 0);
          quotedMask[entries] = len == 7 ? -1L : (1L << (8 * (len + 1))) - 1;
        }
        return entries++;
      }
      if (hashes[slot] == h && s.length == len && same(s, buf, from)) {
        return ids[slot];
      }
      slot = (slot + 1) & (SLOTS - 1);
    }
  }

  /** The key of {@code id}, one shared string. */
  String key(int id) {
    return keys[id];
  }

  /** The length in bytes of the key of {@code id}. */
  int length(int id) {
    return spellingOf[id].length;
  }

  /** The {@link #hash} of the key of {@code id}. */
  int hashOf(int id) {
    return hashOf[id];
  }

  /**
   * Whether {@code b[at, end)} starts with the bytes of the key of {@code id} and a closing
   * quote: an id expected at a position of the line is confirmed by comparing, not hashing.
   */
  boolean spelledAt(int id, byte[] b, int at, int end) {
    long mask = quotedMask[id];
    if (mask != 0 && at + 8 <= end) {
      return ((Decimals.eightBytes(b, at) ^ quoted[id]) & mask) == 0;
    }
    byte[] s = spellingOf[id];
    return at + s.length < end && b[at + s.length] == '"' && same(s, b, at);
  }

  /** Keys are short: a plain loop beats the vectorized mismatch's set-up. */
  private static boolean same(byte[] s, byte[] buf, int from) {
    for (int i = 0; i < s.length; i++) {
      if (s[i] != buf[from + i]) {
        return false;
      }
    }
    return true;
  }

  private static int mix(int h) {
    return h ^ (h >>> 16);
  }
}
