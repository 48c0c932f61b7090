package dev.stepwarden.metrics;

/**
 * CSV with a header line: the header names the columns, each later row's numeric cells become
 * keys. Cells may be quoted (RFC 4180, s. 2: double quotes, {@code ""} for a quote inside).
 * Empty and non-numeric cells are passed over, so a file whose validation column is filled only
 * every few rows reads naturally. A row whose cells are all non-numeric text is taken as a new
 * header: a file that was truncated or rotated and starts over with its header re-reads it.
 * The separator is the one of comma, tab and semicolon that the header has most of outside
 * quotes (comma when it has none); a byte-order mark before the header is dropped. A cell that
 * would be a number but for a comma ({@code 1,234.5} or {@code 0,5} in a semicolon file) is
 * passed over and reported as ambiguous, never read as part of itself.
 * {@code run} and {@code replay} both read CSV through this class.
 */
final class CsvLineParser implements LineParser {
  private final KeyCache keys = new KeyCache();
  private String[] header;
  private char sep = ',';
  private char[] cell = new char[64];
  // cell bounds of the current row, reused
  private int[] starts = new int[16];
  private int[] ends = new int[16];
  private boolean[] quoted = new boolean[16];

  @Override
  public boolean parse(String line, Fields out) {
    if (line.isBlank()) {
      return false;
    }
    if (!line.isEmpty() && line.charAt(0) == '\uFEFF') {
      line = line.substring(1);
    }
    if (header == null) {
      sep = separator(line);
    }
    int n = split(line);
    boolean anyNumber = false;
    for (int i = 0; i < n; i++) {
      if (!quoted[i] && !Decimals.failed(Decimals.parse(line, starts[i], ends[i]))) {
        anyNumber = true;
        break;
      }
    }
    if (!anyNumber) {
      boolean anyText = false;
      for (int i = 0; i < n && !anyText; i++) {
        anyText = ends[i] > starts[i] + (quoted[i] ? 2 : 0);
      }
      if (!anyText) {
        return false; // an empty row is not a header
      }
      char newSep = separator(line);
      if (newSep != sep) {
        sep = newSep; // a file that starts over may be written with another separator
        n = split(line);
      }
      String[] h = new String[n];
      for (int i = 0; i < n; i++) {
        h[i] = text(line, i).trim();
      }
      header = h;
      return false;
    }
    if (header == null) {
      return false; // rows before any header cannot be named
    }
    boolean any = false;
    int cols = Math.min(n, header.length);
    for (int i = 0; i < cols; i++) {
      double v = quoted[i] ? Decimals.parse(text(line, i), 0, text(line, i).length())
          : Decimals.parse(line, starts[i], ends[i]);
      if (!Decimals.failed(v) && !header[i].isEmpty()) {
        out.put(header[i], v);
        any = true;
      } else if (!quoted[i] && !header[i].isEmpty() && commaNumber(line, starts[i], ends[i])) {
        out.ambiguous(header[i]);
      }
    }
    return any;
  }

  private static char separator(String headerLine) {
    int commas = 0;
    int tabs = 0;
    int semicolons = 0;
    boolean inQuotes = false;
    for (int i = 0; i < headerLine.length(); i++) {
      char c = headerLine.charAt(i);
      if (c == '"') {
        inQuotes = !inQuotes;
      } else if (!inQuotes) {
        commas += c == ',' ? 1 : 0;
        tabs += c == '\t' ? 1 : 0;
        semicolons += c == ';' ? 1 : 0;
      }
    }
    if (tabs > commas && tabs >= semicolons) {
      return '\t';
    }
    return semicolons > commas ? ';' : ',';
  }

  /** Digits with a comma among them (and perhaps a point, sign or exponent): 1,234.5 or 0,5. */
  private static boolean commaNumber(String line, int from, int to) {
    boolean comma = false;
    boolean digit = false;
    for (int i = from; i < to; i++) {
      char c = line.charAt(i);
      if (c == ',') {
        comma = true;
      } else if (c >= '0' && c <= '9') {
        digit = true;
      } else if (c != '.' && c != '-' && c != '+' && c != 'e' && c != 'E') {
        return false;
      }
    }
    return comma && digit;
  }

  /** Splits into cells (trimmed bounds for unquoted ones); returns the count. */
  private int split(String line) {
    int n = 0;
    int i = 0;
    int len = line.length();
    while (true) {
      grow(n + 1);
      while (i < len && line.charAt(i) == ' ') {
        i++;
      }
      if (i < len && line.charAt(i) == '"') {
        quoted[n] = true;
        starts[n] = i;
        i++;
        while (i < len) {
          char c = line.charAt(i++);
          if (c == '"') {
            if (i < len && line.charAt(i) == '"') {
              i++;
            } else {
              break;
            }
          }
        }
        ends[n] = i;
        while (i < len && line.charAt(i) != sep) {
          i++;
        }
      } else {
        quoted[n] = false;
        int s = i;
        while (i < len && line.charAt(i) != sep) {
          i++;
        }
        int e = i;
        while (e > s && Character.isWhitespace(line.charAt(e - 1))) {
          e--;
        }
        starts[n] = s;
        ends[n] = e;
      }
      n++;
      if (i >= len) {
        return n;
      }
      i++; // the separator
    }
  }

  /** The text of cell {@code i}, quotes removed (used for headers and quoted cells only). */
  private String text(String line, int i) {
    if (!quoted[i]) {
      return line.substring(starts[i], ends[i]);
    }
    int k = 0;
    int e = ends[i];
    int stop = e > starts[i] + 1 && line.charAt(e - 1) == '"' ? e - 1 : e;
    for (int j = starts[i] + 1; j < stop; j++) {
      char c = line.charAt(j);
      if (c == '"' && j + 1 < stop && line.charAt(j + 1) == '"') {
        j++;
      }
      if (k == cell.length) {
        cell = java.util.Arrays.copyOf(cell, k * 2);
      }
      cell[k++] = c;
    }
    return keys.get(cell, k);
  }

  private void grow(int n) {
    if (n > starts.length) {
      starts = java.util.Arrays.copyOf(starts, n * 2);
      ends = java.util.Arrays.copyOf(ends, n * 2);
      quoted = java.util.Arrays.copyOf(quoted, n * 2);
    }
  }
}
