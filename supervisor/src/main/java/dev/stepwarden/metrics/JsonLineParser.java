package dev.stepwarden.metrics;

/**
 * JSON lines, hand-written for speed: one object a line; nested objects are addressed by dotted
 * keys ({@code val.loss}); numbers, the bare non-finite tokens Python writes ({@code NaN},
 * {@code Infinity}, {@code -Infinity}) and non-finite spellings inside strings ({@code "nan"},
 * {@code "-inf"}) are read; strings, booleans, null and arrays are passed over.
 *
 * <p>Design: a single forward scan over the line's chars with no per-line allocation beyond a
 * new key's first sighting (see {@link KeyCache}) and the rare number {@link Decimals} must hand
 * to the JDK. Malformed input never throws: the scan stops at the first syntax error and keeps
 * what it read before it (a line cut at the line limit still yields its leading fields). A number
 * is taken only when a delimiter follows it, so a cut line cannot yield a shortened number.
 * Not thread-safe (reuses its buffers).
 */
final class JsonLineParser implements LineParser {
  private static final int MAX_DEPTH = 64;

  private final KeyCache keys = new KeyCache();
  private char[] keyBuf = new char[128];

  private String line;
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
    line = text;
    pos = 0;
    end = text.length();
    any = false;
    try {
      skipWs();
      if (pos >= end || text.charAt(pos) != '{') {
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
    int n = prefixLen;
    while (true) {
      if (pos >= end) {
        throw STOP;
      }
      char c = line.charAt(pos++);
      if (c == '"') {
        return n;
      }
      if (c == '\\') {
        c = escape();
      } else if (c < 0x20) {
        throw STOP;
      }
      ensure(n + 1);
      keyBuf[n++] = c;
    }
  }

  private char escape() {
    if (pos >= end) {
      throw STOP;
    }
    char e = line.charAt(pos++);
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
          int d = Character.digit(line.charAt(pos++), 16);
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
      char c = line.charAt(pos++);
      if (c == '"') {
        break;
      }
      if (c == '\\') {
        escaped = true;
        if (pos >= end) {
          throw STOP;
        }
        pos++;
      } else if (c < 0x20) {
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
      char c = line.charAt(pos);
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
    char first = line.charAt(start) == '-' || line.charAt(start) == '+'
        ? line.charAt(start + 1) : line.charAt(start);
    if (first > '9') {
      // a bare word: NaN / Infinity / -Infinity are accepted (Python's json writes them);
      // lower-case nan/inf only inside strings. 1e400 and the like overflow to an infinity.
      if (first != 'N' && first != 'I') {
        throw STOP;
      }
    }
    put(keyLen, v, out);
  }

  private void put(int keyLen, double v, Fields out) {
    out.put(keys.get(keyBuf, keyLen), v);
    any = true;
  }

  private void literal(String word) {
    if (!line.startsWith(word, pos)) {
      throw STOP;
    }
    pos += word.length();
  }

  /** Skips a value anywhere inside an array (arrays carry no metric). */
  private void skipArray(int depth) {
    if (depth >= MAX_DEPTH) {
      throw STOP;
    }
    int level = 1;
    boolean inString = false;
    while (pos < end) {
      char c = line.charAt(pos++);
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
      char c = line.charAt(pos);
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
    return line.charAt(pos);
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
