package dev.stepwarden.metrics;

import java.util.List;
import java.util.regex.Matcher;
import java.util.regex.Pattern;

/**
 * The user's regular expression; each named group that holds a number becomes a key. Lines
 * longer than {@link #MAX_CHARS} are passed over: a pattern that backtracks badly on a long line
 * would otherwise stall the pump thread (metric lines are short; such lines are counted ignored).
 */
final class PatternLineParser implements LineParser {
  static final int MAX_CHARS = 64 * 1024;

  private final Pattern pattern;
  private final List<String> groups;

  PatternLineParser(Pattern pattern, List<String> groups) {
    this.pattern = pattern;
    this.groups = List.copyOf(groups);
  }

  @Override
  public boolean parse(String line, Fields out) {
    if (line.length() > MAX_CHARS) {
      return false;
    }
    Matcher m = pattern.matcher(line);
    if (!m.find()) {
      return false;
    }
    boolean any = false;
    for (String g : groups) {
      int from;
      int to;
      try {
        from = m.start(g);
        to = m.end(g);
      } catch (IllegalArgumentException e) {
        continue;
      }
      if (from < 0) {
        continue;
      }
      while (from < to && Character.isWhitespace(line.charAt(from))) {
        from++;
      }
      while (to > from && Character.isWhitespace(line.charAt(to - 1))) {
        to--;
      }
      double v = Decimals.parse(line, from, to);
      if (!Decimals.failed(v)) {
        out.put(g, v);
        any = true;
      }
    }
    return any;
  }
}
