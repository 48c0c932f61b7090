package dev.stepwarden.metrics;

import java.nio.charset.StandardCharsets;

/**
 * JSON lines, hand-written for speed: one object a line; nested objects are addressed by dotted
 * keys ({@code val.loss}); numbers, the bare non-finite tokens Python writes ({@code NaN},
 * {@code Infinity}, {@code -Infinity}) and non-finite spellings inside strings ({@code "nan"},
 * {@code "-inf"}) are read; strings, booleans, null and arrays are passed over.
 *
 * <p>Design: a single forward scan over the line's UTF-8 bytes (the pump's own buffer, or a
 * string encoded into a reused one) with no per-line allocation beyond a new key's first
 * sighting (see {@link KeyCache}) and the rare number {@link Decimals} must hand to the JDK. All
 * JSON syntax is ASCII, so multi-byte characters can only sit inside strings and keys. A
 * top-level key is first compared with the key its position had last line (trainers repeat
 * their keys in order), else hashed while it is scanned and looked up; it is named to the
 * receiver by its cache id as well as by its string ({@link LineParser.Fields#put(int, String,
 * double, byte[], int, int)}), and a receiver that does not want a key's value ({@link
 * LineParser.Fields#wants}) gets its number checked, not converted. A number is scanned once,
 * eight digits at a time where it can: its RFC 8259 s. 6 grammar is checked while its digits are
 * gathered, so a number token that is valid JSON is handed on as text too (the normalized file
 * can carry it as printed instead of formatting the double again); any other spelling takes the
 * general path ({@link Decimals#parse}). Malformed input never throws: the scan stops at the
 * first syntax error and keeps what it read before it (a line cut at the line limit still yields
 * its leading fields). A number is taken only when a delimiter follows it, so a cut line cannot
 * yield a shortened number.
 * Not thread-safe (reuses its buffers).
 */
final class JsonLineParser implements LineParser {
  private static final int MAX_DEPTH = 64;

  private final KeyCache keys = new KeyCache();
  private byte[] keyBuf = new byte[128];
  private byte[] encoded = new byte[256];

  private byte[] line;
  private int pos;
  private int end;
  private boolean any;
  /**
   * The key just read, {@link KeyCache#hash} {@code keyHash}: in the line at {@code keyFrom}
   * when it needed no copy (a top-level key without escapes), else in keyBuf from 0.
   */
  private boolean keyInLine;
  private int keyFrom;
  private int keyHash;
  /** The id of the key just read when it was expected there, else -1 (look it up). */
  private int keyKnown = -1;
  /**
   * Top-level members begun in this line; and per member position, the id the key there had
   * last time (-1: none yet). Trainers print the same keys in the same order on every line, so
   * the expected id is confirmed by comparing the bytes; only keys read off the line as they
   * are (no escapes) are recorded, so their bytes in a line are their spelling.
   */
  private int member;
  private final int[] expected = newExpected();

  /** Thrown internally on a syntax error; preallocated, no stack trace. */
  private static final class Stop extends RuntimeException {
    private static final long serialVersionUID = 1L;

    Stop() {
      super(null, null, false, false);
    }
  }

  private static final Stop STOP = new Stop();

  private static final int EXPECTED = 32;

  /** The ASCII bytes a number token (or bare word) runs on: digits, . - + and letters. */
  private static final boolean[] TOKEN = new boolean[128];

  static {
    for (int c = 0; c < 128; c++) {
      TOKEN[c] = (c >= '0' && c <= '9') || c == '.' || c == '-' || c == '+'
          || (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z');
    }
  }

  private static int[] newExpected() {
    int[] e = new int[EXPECTED];
    java.util.Arrays.fill(e, -1);
    return e;
  }

  @Override
  public boolean parse(String text, Fields out) {
    int n = text.length();
    if (n > encoded.length / 3) {
      encoded = new byte[Math.max(n * 3, encoded.length * 2)];
    }
    int len = 0;
    for (int i = 0; i < n; i++) {
      char c = text.charAt(i);
      if (c >= 0x80) { // not ASCII: let the JDK encode it (lone surrogates become '?')
        byte[] b = text.getBytes(StandardCharsets.UTF_8);
        return parse(b, 0, b.length, out);
      }
      encoded[len++] = (byte) c;
    }
    return parse(encoded, 0, len, out);
  }

  @Override
  public boolean parse(byte[] b, int off, int len, Fields out) {
    line = b;
    pos = off;
    end = off + len;
    any = false;
    member = 0;
    try {
      skipWs();
      if (pos >= end || b[pos] != '{') {
        return false;
      }
      pos++;
      object(0, 0, 0, out);
    } catch (Stop e) {
      // malformed: keep what was read before the error
    } finally {
      line = null;
    }
    return any;
  }

  /**
   * Parses members after the opening brace; {@code prefixLen} bytes of keyBuf, hashing to
   * {@code prefixHash}, are the prefix.
   */
  private void object(int depth, int prefixLen, int prefixHash, Fields out) {
    if (next() == '}') {
      pos++;
      return;
    }
    while (true) {
      if (next() != '"') {
        throw STOP;
      }
      pos++;
      int keyLen = readKey(prefixLen, prefixHash);
      if (next() != ':') {
        throw STOP;
      }
      pos++;
      int c = next();
      if (c == '{') {
        pos++;
        if (depth + 1 >= MAX_DEPTH) {
          throw STOP;
        }
        ensure(keyLen + 1);
        if (keyInLine) {
          System.arraycopy(line, keyFrom, keyBuf, 0, keyLen);
        }
        keyBuf[keyLen] = '.';
        object(depth + 1, keyLen + 1, 31 * keyHash + '.', out);
      } else if (c == '"') {
        pos++;
        stringValue(keyLen, out);
      } else if (c == '[') {
        pos++;
        skipArray(depth + 1);
      } else if (c == 't') {
        literal("true");
      } else if (c == 'f') {
        literal("false");
      } else if (c == 'n') {
        literal("null");
      } else {
        number(keyLen, out);
      }
      c = next();
      pos++;
      if (c == ',') {
        continue;
      }
      if (c == '}') {
        return;
      }
      throw STOP;
    }
  }


  /**
   * Reads a key (after its opening quote) after the prefix; returns the key's whole length and
   * sets keyInLine, keyFrom and keyHash.
   */
  private int readKey(int prefixLen, int prefixHash) {
    keyKnown = -1;
    if (prefixLen == 0 && member++ < EXPECTED) {
      int id = expected[member - 1];
      if (id >= 0 && keys.spelledAt(id, line, pos, end)) {
        int len = keys.length(id);
        ensure(len); // as below (a cached key is short: no growth)
        keyInLine = true;
        keyFrom = pos;
        keyHash = keys.hashOf(id);
        keyKnown = id;
        pos += len + 1;
        return len;
      }
    }
    // Fast path: a key without escapes or control chars is hashed as it is scanned and left in
    // the line (or copied after the prefix in one go).
    int start = pos;
    int p = pos;
    byte[] l = line;
    int h = prefixHash;
    while (p < end) {
      byte c = l[p];
      if (c == '"') {
        int len = p - start;
        ensure(prefixLen + len); // also the length limit, as when every key was copied
        pos = p + 1;
        keyHash = h;
        if (prefixLen == 0) {
          keyInLine = true;
          keyFrom = start;
          return len;
        }
        System.arraycopy(l, start, keyBuf, prefixLen, len);
        keyInLine = false;
        keyFrom = 0;
        return prefixLen + len;
      }
      if (c == '\\' || (c >= 0 && c < 0x20)) {
        break;
      }
      h = 31 * h + c;
      p++;
    }
    keyInLine = false;
    keyFrom = 0;
    int n = prefixLen;
    while (true) {
      if (pos >= end) {
        throw STOP;
      }
      byte raw = line[pos++];
      if (raw == '"') {
        keyHash = KeyCache.hash(keyBuf, 0, n);
        return n;
      }
      char c;
      if (raw == '\\') {
        c = escape();
      } else if (raw >= 0 && raw < 0x20) {
        throw STOP;
      } else {
        ensure(n + 1);
        keyBuf[n++] = raw; // a UTF-8 byte of the key as it is
        continue;
      }
      if (c >= 0x80) {
        n = putUtf8(n, c);
      } else {
        ensure(n + 1);
        keyBuf[n++] = (byte) c;
      }
    }
  }

  /** Appends an escaped key char as UTF-8; a surrogate pair must come as two escapes. */
  private int putUtf8(int n, char c) {
    ensure(n + 4);
    if (Character.isHighSurrogate(c) && pos + 6 <= end && line[pos] == '\\'
        && line[pos + 1] == 'u') {
      pos++;
      char low = escape();
      int cp = Character.isLowSurrogate(low) ? Character.toCodePoint(c, low) : 0xFFFD;
      if (cp > 0xFFFF) {
        keyBuf[n++] = (byte) (0xF0 | (cp >> 18));
        keyBuf[n++] = (byte) (0x80 | ((cp >> 12) & 0x3F));
        keyBuf[n++] = (byte) (0x80 | ((cp >> 6) & 0x3F));
        keyBuf[n++] = (byte) (0x80 | (cp & 0x3F));
        return n;
      }
      c = (char) cp;
    } else if (Character.isSurrogate(c)) {
      c = 0xFFFD;
    }
    if (c < 0x800) {
      keyBuf[n++] = (byte) (0xC0 | (c >> 6));
    } else {
      keyBuf[n++] = (byte) (0xE0 | (c >> 12));
      keyBuf[n++] = (byte) (0x80 | ((c >> 6) & 0x3F));
    }
    keyBuf[n++] = (byte) (0x80 | (c & 0x3F));
    return n;
  }

  private char escape() {
    if (pos >= end) {
      throw STOP;
    }
    char e = (char) line[pos++];
    switch (e) {
      case '"':
      case '\\':
      case '/':
        return e;
      case 'b':
        return '\b';
      case 'f':
        return '\f';
      case 'n':
        return '\n';
      case 'r':
        return '\r';
      case 't':
        return '\t';
      case 'u': {
        if (pos + 4 > end) {
          throw STOP;
        }
        int v = 0;
        for (int k = 0; k < 4; k++) {
          int d = Character.digit((char) (line[pos++] & 0xFF), 16);
          if (d < 0) {
            throw STOP;
          }
          v = v * 16 + d;
        }
        return (char) v;
      }
      default:
        throw STOP;
    }
  }

  /** A string value: read only when it spells a non-finite number. */
  private void stringValue(int keyLen, Fields out) {
    int start = pos;
    boolean escaped = false;
    while (true) {
      if (pos >= end) {
        throw STOP;
      }
      byte c = line[pos++];
      if (c == '"') {
        break;
      }
      if (c == '\\') {
        escaped = true;
        if (pos >= end) {
          throw STOP;
        }
        pos++;
      } else if (c >= 0 && c < 0x20) {
        throw STOP;
      }
    }
    int stop = pos - 1;
    int len = stop - start;
    if (!escaped && len >= 3 && len <= 9) {
      double v = Decimals.parse(line, start, stop);
      if (!Decimals.failed(v) && !Double.isFinite(v)) {
        put(keyLen, v, null, -1, -1, out);
      }
    }
  }

  /**
   * A number value. The common case, an RFC 8259 number followed by a delimiter, is read in this
   * one scan, its digits gathered exactly as {@link Decimals#parse} gathers them; anything else
   * is left to {@link #otherNumber}, the general path, which decides alike for every token.
   */
  private void number(int keyLen, Fields out) {
    byte[] l = line;
    int e = end;
    int start = pos;
    int p = start;
    boolean neg = false;
    if (p < e && l[p] == '-') {
      neg = true;
      p++;
    }
    long mant = 0;
    int digits = 0; // significant digits kept in mant (18 fit a long)
    int exp10 = 0;
    boolean truncated = false;
    int c;
    // Eight digits at once while they all fit the 18 kept: once eight bytes are not all digits,
    // no later window of the same run can be, so the rest go one by one.
    if (p < e && l[p] == '0') {
      p++;
    } else if (p < e && l[p] >= '1' && l[p] <= '9') {
      long w;
      while (digits <= 10 && p + 8 <= e && Decimals.eightDigits(w = Decimals.eightBytes(l, p))) {
        mant = mant * 100_000_000 + Decimals.eightDigitValue(w);
        digits += 8;
        p += 8;
      }
      while (p < e && (c = l[p]) >= '0' && c <= '9') {
        if (digits < 18) {
          mant = mant * 10 + (c - '0'); // no leading zero: the first digit is 1-9
          digits++;
        } else {
          exp10++;
          truncated |= c != '0';
        }
        p++;
      }
    } else {
      otherNumber(keyLen, out);
      return;
    }
    if (p < e && l[p] == '.') {
      int first = ++p;
      if (mant == 0) {
        while (p < e && l[p] == '0') { // leading zeros of a number below 1: not significant
          exp10--;
          p++;
        }
      }
      long w;
      while (digits <= 10 && p + 8 <= e && Decimals.eightDigits(w = Decimals.eightBytes(l, p))) {
        mant = mant * 100_000_000 + Decimals.eightDigitValue(w); // mant != 0 or w starts 1-9
        digits += 8;
        exp10 -= 8;
        p += 8;
      }
      while (p < e && (c = l[p]) >= '0' && c <= '9') {
        if (digits < 18) {
          if (mant != 0 || c != '0') {
            mant = mant * 10 + (c - '0');
            digits++;
          }
          exp10--;
        } else {
          truncated |= c != '0';
        }
        p++;
      }
      if (p == first) {
        otherNumber(keyLen, out);
        return;
      }
    }
    if (p < e && ((c = l[p]) == 'e' || c == 'E')) {
      p++;
      boolean eneg = false;
      if (p < e && ((c = l[p]) == '-' || c == '+')) {
        eneg = c == '-';
        p++;
      }
      int first = p;
      int x = 0;
      while (p < e && (c = l[p]) >= '0' && c <= '9') {
        if (x < 100_000) {
          x = x * 10 + (c - '0');
        }
        p++;
      }
      if (p == first) {
        otherNumber(keyLen, out);
        return;
      }
      exp10 += eneg ? -x : x;
    }
    if (p >= e) {
      throw STOP; // no delimiter after it: the line was cut, the number may be too
    }
    c = l[p];
    if (c >= 0 && TOKEN[c]) {
      otherNumber(keyLen, out); // the token goes on ("0123", "1.5.2", "2x"): not this grammar
      return;
    }
    pos = p;
    any = true;
    int id = keyId(keyLen);
    if (id < 0) {
      out.put(newKey(keyLen), Decimals.value(mant, exp10, truncated, neg, l, start, p), l, start,
          p);
    } else if (out.wants(id)) {
      out.put(id, keys.key(id), Decimals.value(mant, exp10, truncated, neg, l, start, p), l,
          start, p);
    }
  }

  /** Any number token that is not a delimited RFC 8259 number: a bare word, '+1', '.5', ... */
  private void otherNumber(int keyLen, Fields out) {
    int start = pos;
    while (pos < end) {
      byte c = line[pos];
      if ((c >= '0' && c <= '9') || c == '.' || c == '-' || c == '+' || c == 'e' || c == 'E'
          || (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z')) {
        pos++;
      } else {
        break;
      }
    }
    if (pos >= end) {
      throw STOP; // no delimiter after it: the line was cut, the number may be too
    }
    double v = Decimals.parse(line, start, pos);
    if (Decimals.failed(v)) {
      throw STOP;
    }
    byte first = line[start] == '-' || line[start] == '+' ? line[start + 1] : line[start];
    if (first > '9') {
      // a bare word: NaN / Infinity / -Infinity are accepted (Python's json writes them);
      // lower-case nan/inf only inside strings. 1e400 and the like overflow to an infinity.
      if (first != 'N' && first != 'I') {
        throw STOP;
      }
    }
    if (first <= '9' && plainJson(line, start, pos)) {
      put(keyLen, v, line, start, pos, out);
    } else {
      put(keyLen, v, null, -1, -1, out);
    }
  }

  /** Hands on a value read off the general path; {@code text} null when not valid JSON. */
  private void put(int keyLen, double v, byte[] text, int from, int to, Fields out) {
    any = true;
    int id = keyId(keyLen);
    if (id >= 0) {
      out.put(id, keys.key(id), v, text, from, to);
    } else if (text == null) {
      out.put(newKey(keyLen), v);
    } else {
      out.put(newKey(keyLen), v, text, from, to);
    }
  }

  /** The cache id of the key just read, -1 when it has none (too long, or the cache is full). */
  private int keyId(int keyLen) {
    if (keyKnown >= 0) {
      return keyKnown;
    }
    if (!keyInLine) {
      return keys.id(keyBuf, 0, keyLen, keyHash);
    }
    int id = keys.id(line, keyFrom, keyLen, keyHash);
    if (member <= EXPECTED) {
      expected[member - 1] = id; // keyInLine: a top-level key, the member-th of the line
    }
    return id;
  }

  private String newKey(int keyLen) {
    return keyInLine ? new String(line, keyFrom, keyLen, StandardCharsets.UTF_8)
        : new String(keyBuf, 0, keyLen, StandardCharsets.UTF_8);
  }

  /** RFC 8259 s. 6 number grammar: -?(0|[1-9][0-9]*)(.[0-9]+)?([eE][+-]?[0-9]+)? */
  static boolean plainJson(byte[] b, int i, int to) {
    if (i < to && b[i] == '-') {
      i++;
    }
    if (i >= to) {
      return false;
    }
    if (b[i] == '0') {
      i++;
    } else if (b[i] >= '1' && b[i] <= '9') {
      while (++i < to && b[i] >= '0' && b[i] <= '9') {
        // integer digits
      }
    } else {
      return false;
    }
    if (i < to && b[i] == '.') {
      int d = ++i;
      while (i < to && b[i] >= '0' && b[i] <= '9') {
        i++;
      }
      if (i == d) {
        return false;
      }
    }
    if (i < to && (b[i] == 'e' || b[i] == 'E')) {
      if (++i < to && (b[i] == '+' || b[i] == '-')) {
        i++;
      }
      int d = i;
      while (i < to && b[i] >= '0' && b[i] <= '9') {
        i++;
      }
      if (i == d) {
        return false;
      }
    }
    return i == to;
  }

  private void literal(String word) {
    int n = word.length();
    if (pos + n > end) {
      throw STOP;
    }
    for (int k = 0; k < n; k++) {
      if (line[pos + k] != word.charAt(k)) {
        throw STOP;
      }
    }
    pos += n;
  }

  /** Skips a value anywhere inside an array (arrays carry no metric). */
  private void skipArray(int depth) {
    if (depth >= MAX_DEPTH) {
      throw STOP;
    }
    int level = 1;
    boolean inString = false;
    while (pos < end) {
      byte c = line[pos++];
      if (inString) {
        if (c == '\\') {
          pos++;
        } else if (c == '"') {
          inString = false;
        }
      } else if (c == '"') {
        inString = true;
      } else if (c == '[' || c == '{') {
        if (++level + depth >= MAX_DEPTH) {
          throw STOP;
        }
      } else if (c == ']' || c == '}') {
        if (--level == 0) {
          if (c != ']') {
            throw STOP;
          }
          return;
        }
      }
    }
    throw STOP;
  }

  private void skipWs() {
    while (pos < end) {
      byte c = line[pos];
      if (c > ' ' || (c != ' ' && c != '\t' && c != '\n' && c != '\r')) {
        return; // the first test alone settles every printable ASCII byte
      }
      pos++;
    }
  }

  /** Skips whitespace; returns the byte there (pos on it), or stops at the end of the line. */
  private int next() {
    byte[] l = line;
    int e = end;
    for (int p = pos; p < e; p++) {
      byte c = l[p];
      if (c > ' ' || (c != ' ' && c != '\t' && c != '\n' && c != '\r')) {
        pos = p;
        return c & 0xFF;
      }
    }
    throw STOP;
  }


  private void ensure(int n) {
    if (n > keyBuf.length) {
      if (n > 64 * 1024) {
        throw STOP;
      }
      keyBuf = java.util.Arrays.copyOf(keyBuf, Math.max(n, keyBuf.length * 2));
    }
  }
}
