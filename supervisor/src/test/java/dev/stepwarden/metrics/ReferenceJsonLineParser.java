package dev.stepwarden.metrics;

import java.nio.charset.StandardCharsets;

/**
 * The JSON line parser as it was before key ids, fused number scanning and skipped unwanted
 * values (commit 5a8acc8), kept verbatim as the reference the fast parser must agree with on
 * every put (key, value bits, printed text), on valid, malformed and cut lines alike.
 *
 * <p>Original design note:
 * JSON lines, hand-written for speed: one object a line; nested objects are addressed by dotted
 * keys ({@code val.loss}); numbers, the bare non-finite tokens Python writes ({@code NaN},
 * {@code Infinity}, {@code -Infinity}) and non-finite spellings inside strings ({@code "nan"},
 * {@code "-inf"}) are read; strings, booleans, null and arrays are passed over.
 *
 * <p>Design: a single forward scan over the line's UTF-8 bytes (the pump's own buffer, or a
 * string encoded into a reused one) with no per-line allocation beyond a new key's first
 * sighting (see {@link KeyCache}) and the rare number {@link Decimals} must hand to the JDK. All
 * JSON syntax is ASCII, so multi-byte characters can only sit inside strings and keys. A number
 * token that is valid JSON is also handed on as text, so the normalized file can carry it as
 * printed instead of formatting the double again. Malformed input never throws: the scan stops at the first syntax error and keeps
 * what it read before it (a line cut at the line limit still yields its leading fields). A number
 * is taken only when a delimiter follows it, so a cut line cannot yield a shortened number.
 * Not thread-safe (reuses its buffers).
 */
final class ReferenceJsonLineParser implements LineParser {
  private static final int MAX_DEPTH = 64;

  private final KeyCache keys = new KeyCache();
  private byte[] keyBuf = new byte[128];
  private byte[] encoded = new byte[256];

  private byte[] line;
  private int pos;
  private int end;
  private boolean any;

  /** Thrown internally on a syntax error; preallocated, no stack trace. */
  private static final class Stop extends RuntimeException {
    private static final long serialVersionUID = 1L;

    Stop() {
      super(null, null, false, false);
    }
  }

  private static final Stop STOP = new Stop();

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
    try {
      skipWs();
      if (pos >= end || b[pos] != '{') {
        return false;
      }
      pos++;
      object(0, 0, out);
    } catch (Stop e) {
      // malformed: keep what was read before the error
    } finally {
      line = null;
    }
    return any;
  }

  /** Parses members after the opening brace; {@code prefixLen} chars of keyBuf are the prefix. */
  private void object(int depth, int prefixLen, Fields out) {
    skipWs();
    if (peek() == '}') {
      pos++;
      return;
    }
    while (true) {
      if (peek() != '"') {
        throw STOP;
      }
      pos++;
      int keyLen = readKey(prefixLen);
      skipWs();
      if (peek() != ':') {
        throw STOP;
      }
      pos++;
      skipWs();
      char c = peek();
      if (c == '{') {
        pos++;
        if (depth + 1 >= MAX_DEPTH) {
          throw STOP;
        }
        ensure(keyLen + 1);
        keyBuf[keyLen] = '.';
        object(depth + 1, keyLen + 1, out);
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
      skipWs();
      c = peek();
      pos++;
      if (c == ',') {
        skipWs();
        continue;
      }
      if (c == '}') {
        return;
      }
      throw STOP;
    }
  }

  /** Reads a key (after its opening quote) into keyBuf after the prefix; returns the new length. */
  private int readKey(int prefixLen) {
    // Fast path: a key without escapes or control chars is copied in one go.
    int start = pos;
    int p = pos;
    byte[] l = line;
    while (p < end) {
      byte c = l[p];
      if (c == '"') {
        int len = p - start;
        ensure(prefixLen + len);
        System.arraycopy(l, start, keyBuf, prefixLen, len);
        pos = p + 1;
        return prefixLen + len;
      }
      if (c == '\\' || (c >= 0 && c < 0x20)) {
        break;
      }
      p++;
    }
    int n = prefixLen;
    while (true) {
      if (pos >= end) {
        throw STOP;
      }
      byte raw = line[pos++];
      if (raw == '"') {
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
        put(keyLen, v, out);
      }
    }
  }

  private void number(int keyLen, Fields out) {
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
      out.put(keys.get(keyBuf, keyLen), v, line, start, pos);
      any = true;
    } else {
      put(keyLen, v, out);
    }
  }

  private void put(int keyLen, double v, Fields out) {
    out.put(keys.get(keyBuf, keyLen), v);
    any = true;
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
      if (c != ' ' && c != '\t' && c != '\n' && c != '\r') {
        return;
      }
      pos++;
    }
  }

  private char peek() {
    if (pos >= end) {
      throw STOP;
    }
    return (char) (line[pos] & 0xFF);
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
