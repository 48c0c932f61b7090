package dev.stepwarden.replay;

import java.util.ArrayList;
import java.util.List;

/**
 * CSV rows turned into JSON objects for the intake: the header names the keys, numbers stay
 * numbers, the non-finite spellings become strings the JSON parser reads as non-finite, and
 * anything else is passed as a string (which the intake passes over). Quoted fields are
 * understood; a field holding a comma must be quoted (RFC 4180, s2).
 */
final class Csv {
  private Csv() {}

  static String[] header(String line) {
    List<String> names = split(line.startsWith("\uFEFF") ? line.substring(1) : line);
    return names.stream().map(String::strip).toArray(String[]::new);
  }

  static String toJson(String[] header, String line) {
    List<String> cells = split(line);
    StringBuilder b = new StringBuilder(line.length() + header.length * 8 + 2).append('{');
    boolean any = false;
    for (int i = 0; i < header.length && i < cells.size(); i++) {
      String v = cells.get(i).strip();
      if (v.isEmpty()) {
        continue; // an empty cell: this row does not carry that series
      }
      if (any) {
        b.append(',');
      }
      any = true;
      quote(b, header[i]).append(':');
      if (isNumber(v)) {
        b.append(v);
      } else {
        quote(b, v);
      }
    }
    return b.append('}').toString();
  }

  private static boolean isNumber(String v) {
    // JSON numbers only: no leading '+', no bare '.5', no hex; Double.parseDouble is too lenient.
    return v.matches("-?(0|[1-9][0-9]*)(\\.[0-9]+)?([eE][+-]?[0-9]+)?");
  }

  private static StringBuilder quote(StringBuilder b, String s) {
    b.append('"');
    for (int i = 0; i < s.length(); i++) {
      char c = s.charAt(i);
      if (c == '"' || c == '\\') {
        b.append('\\').append(c);
      } else if (c < 0x20) {
        b.append(String.format("\\u%04x", (int) c));
      } else {
        b.append(c);
      }
    }
    return b.append('"');
  }

  static List<String> split(String line) {
    List<String> out = new ArrayList<>();
    StringBuilder cur = new StringBuilder();
    boolean quoted = false;
    for (int i = 0; i < line.length(); i++) {
      char c = line.charAt(i);
      if (quoted) {
        if (c == '"' && i + 1 < line.length() && line.charAt(i + 1) == '"') {
          cur.append('"');
          i++;
        } else if (c == '"') {
          quoted = false;
        } else {
          cur.append(c);
        }
      } else if (c == '"') {
        quoted = true;
      } else if (c == ',') {
        out.add(cur.toString());
        cur.setLength(0);
      } else {
        cur.append(c);
      }
    }
    out.add(cur.toString());
    return out;
  }
}
