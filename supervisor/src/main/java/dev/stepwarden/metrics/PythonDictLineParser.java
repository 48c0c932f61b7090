package dev.stepwarden.metrics;

/**
 * Lines that print a Python dict as Python writes it ({@code print(logs)}, {@code str(dict)}):
 * {@code {'loss': 0.69, 'grad_norm': 1.2, 'learning_rate': 5e-05, 'epoch': 0.01}}.
 *
 * <p>Read like JSON lines: the first {@code {} of the line opens the dict (text before it, such
 * as a progress bar or a logger's prefix, is passed over); nested dicts are addressed by dotted
 * keys ({@code val.loss}); numbers and Python's non-finite spellings ({@code nan}, {@code inf},
 * {@code -inf}) are read; strings, {@code True}, {@code False}, {@code None}, lists, tuples and
 * sets are passed over. Keys are strings in single or double quotes with Python's backslash
 * escapes. A value written as a call whose first argument is a number ({@code
 * np.float64(0.5)}, {@code tensor(0.6931, device='cpu')}) is read as that number, as a reader
 * of the line would. A number followed by a comma and a digit ({@code 1,234.5}) is reported as
 * ambiguous and ends the line, never read as 1. Malformed input never throws: the scan stops at the first syntax error and
 * keeps what it read before it; a number is taken only when a delimiter follows it, so a line cut
 * at the line limit cannot yield a shortened number. Not thread-safe (reuses its buffer).
 */
final class PythonDictLineParser implements LineParser {
  private static final int MAX_DEPTH = 64;

  private final StringBuilder key = new StringBuilder(64);
  private String line;
  private int pos;
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
    int open = text.indexOf('{');
    if (open < 0) {
      return false;
    }
    line = text;
    pos = open + 1;
    any = false;
    try {
      dict(0, "", out);
    } catch (Stop e) {
      // keep what was read before the error
    } finally {
      line = null;
    }
    return any;
  }

  /** Members after an opening brace, each key after {@code prefix}, up to the closing brace. */
  private void dict(int depth, String prefix, Fields out) {
    if (depth >= MAX_DEPTH) {
      throw STOP;
    }
    blanks();
    if (peek() == '}') {
      pos++;
      return;
    }
    while (true) {
      blanks();
      char q = peek();
      String k = null;
      if (q == '\'' || q == '"') {
        k = prefix + string(q);
      } else {
        skipValue(depth); // a number or other non-string key: its value is passed over
      }
      blanks();
      if (peek() != ':') {
        throw STOP;
      }
      pos++;
      blanks();
      if (k == null) {
        skipValue(depth);
      } else {
        value(depth, k, out);
      }
      blanks();
      char c = peek();
      pos++;
      if (c == '}') {
        return;
      }
      if (c != ',') {
        throw STOP;
      }
    }
  }

  private void value(int depth, String k, Fields out) {
    char c = peek();
    if (c == '{') {
      pos++;
      dict(depth + 1, k + ".", out);
      return;
    }
    if (c == '\'' || c == '"' || c == '[' || c == '(') {
      skipValue(depth);
      return;
    }
    int start = pos;
    while (pos < line.length() && isWord(line.charAt(pos))) {
      pos++;
    }
    int end = pos;
    if (end == start) {
      throw STOP;
    }
    if (pos < line.length() && line.charAt(pos) == '(') {
      call(depth, k, out); // np.float64(0.5), tensor(0.69, device='cpu')
      return;
    }
    if (pos >= line.length()) {
      throw STOP; // no delimiter: the line may be cut inside the number
    }
    if (pos + 1 < line.length() && line.charAt(pos) == ',' && line.charAt(pos + 1) >= '0'
        && line.charAt(pos + 1) <= '9') {
      out.ambiguous(k); // 1,234.5: Python itself never writes a comma without a blank here
      throw STOP;
    }
    double v = Decimals.parse(line, start, end);
    if (!Decimals.failed(v)) {
      out.put(k, v);
      any = true;
    } else if (!isConstant(start, end)) {
      throw STOP;
    }
  }

  /** A call's first argument when it is a number; the call is passed over either way. */
  private void call(int depth, String k, Fields out) {
    int paren = pos;
    pos++;
    blanks();
    int start = pos;
    while (pos < line.length() && isWord(line.charAt(pos))) {
      pos++;
    }
    int end = pos;
    blanks();
    if (end > start && pos < line.length() && (peek() == ',' || peek() == ')')) {
      double v = Decimals.parse(line, start, end);
      if (!Decimals.failed(v)) {
        out.put(k, v);
        any = true;
      }
    }
    pos = paren;
    skipValue(depth); // from the opening parenthesis past its match
  }

  private boolean isConstant(int start, int end) {
    return line.startsWith("True", start) && end - start == 4
        || line.startsWith("False", start) && end - start == 5
        || line.startsWith("None", start) && end - start == 4;
  }

  /** Passes over one value of any kind (balanced brackets, strings with escapes). */
  private void skipValue(int depth) {
    int level = 0;
    while (pos < line.length()) {
      char c = line.charAt(pos);
      if (c == '\'' || c == '"') {
        string(c);
        continue;
      }
      if (c == '{' || c == '[' || c == '(') {
        if (++level + depth > MAX_DEPTH) {
          throw STOP;
        }
      } else if (c == '}' || c == ']' || c == ')') {
        if (level == 0) {
          return;
        }
        level--;
      } else if ((c == ',' || c == ':') && level == 0) {
        return;
      }
      pos++;
    }
    throw STOP;
  }

  /** A quoted string from its opening quote {@code q}; returns its text. */
  private String string(char q) {
    pos++;
    key.setLength(0);
    while (pos < line.length()) {
      char c = line.charAt(pos++);
      if (c == q) {
        return key.toString();
      }
      if (c == '\\' && pos < line.length()) {
        char e = line.charAt(pos++);
        switch (e) {
          case 'n' -> key.append('\n');
          case 't' -> key.append('\t');
          case 'r' -> key.append('\r');
          case 'x' -> key.append((char) hex(2));
          case 'u' -> key.append((char) hex(4));
          default -> key.append(e); // \\ \' \" and anything else as itself
        }
      } else {
        key.append(c);
      }
    }
    throw STOP;
  }

  private int hex(int digits) {
    if (pos + digits > line.length()) {
      throw STOP;
    }
    int v = 0;
    for (int i = 0; i < digits; i++) {
      int d = Character.digit(line.charAt(pos++), 16);
      if (d < 0) {
        throw STOP;
      }
      v = v * 16 + d;
    }
    return v;
  }

  private char peek() {
    if (pos >= line.length()) {
      throw STOP;
    }
    return line.charAt(pos);
  }

  private void blanks() {
    while (pos < line.length() && Character.isWhitespace(line.charAt(pos))) {
      pos++;
    }
  }

  /** The characters a number, a constant or a dotted name runs on. */
  private static boolean isWord(char c) {
    return (c >= '0' && c <= '9') || (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z')
        || c == '.' || c == '-' || c == '+' || c == '_';
  }
}
