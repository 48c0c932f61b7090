package dev.stepwarden.metrics;

/**
 * {@code step=10 loss=0.31 lr=1e-3}, also {@code key: value}, separated by spaces, commas or pipes.
 *
 * <p>A key is a run of letters, digits and {@code _./-} (from its first letter or underscore),
 * then optional blanks, {@code =} or {@code :}, optional blanks, and a value that runs to the next
 * blank, comma, pipe or semicolon. A number followed by a comma and a digit ({@code
 * loss=1,234.5}: a thousands separator, or 1 and a stray 234.5?) is passed over and reported as
 * ambiguous, never read as 1. A hand-written single pass rather than a regular expression:
 * the obvious pattern backtracks quadratically on a long line without a separator (a 1 MiB
 * progress bar took minutes), and this parser runs on the pump thread.
 */
final class PairsLineParser implements LineParser {
  @Override
  public boolean parse(String line, Fields out) {
    boolean any = false;
    int n = line.length();
    int i = 0;
    while (i < n) {
      if (!isKeyChar(line.charAt(i))) {
        i++;
        continue;
      }
      int start = i;
      while (i < n && isKeyChar(line.charAt(i))) {
        i++;
      }
      int end = i;
      int k = start;
      while (k < end && !isKeyStart(line.charAt(k))) {
        k++;
      }
      if (k == end) {
        continue;
      }
      int j = end;
      while (j < n && isBlank(line.charAt(j))) {
        j++;
      }
      if (j >= n || (line.charAt(j) != '=' && line.charAt(j) != ':')) {
        continue;
      }
      j++;
      while (j < n && isBlank(line.charAt(j))) {
        j++;
      }
      int valueStart = j;
      while (j < n && !endsValue(line.charAt(j))) {
        j++;
      }
      if (j == valueStart) {
        continue;
      }
      if (j + 1 < n && line.charAt(j) == ',' && isDigit(line.charAt(j + 1))) {
        out.ambiguous(line.substring(k, end));
        i = j; // the digits after the comma start no key
        continue;
      }
      double v = Decimals.parse(line, valueStart, j);
      if (!Decimals.failed(v)) {
        out.put(line.substring(k, end), v);
        any = true;
      }
      i = j;
    }
    return any;
  }

  private static boolean isDigit(char c) {
    return c >= '0' && c <= '9';
  }

  private static boolean isKeyStart(char c) {
    return (c >= 'A' && c <= 'Z') || (c >= 'a' && c <= 'z') || c == '_';
  }

  private static boolean isKeyChar(char c) {
    return isKeyStart(c) || (c >= '0' && c <= '9') || c == '.' || c == '/' || c == '-';
  }

  /** The blanks of {@code \s} in a Java regular expression. */
  private static boolean isBlank(char c) {
    return c == ' ' || c == '\t' || c == '\n' || c == '\u000B' || c == '\f' || c == '\r';
  }

  private static boolean endsValue(char c) {
    return isBlank(c) || c == ',' || c == '|' || c == ';';
  }
}
