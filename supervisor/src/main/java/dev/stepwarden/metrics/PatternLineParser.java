package dev.stepwarden.metrics;

import java.util.List;
import java.util.regex.Matcher;
import java.util.regex.Pattern;

/** The user's regular expression; each named group that holds a number becomes a key. */
final class PatternLineParser implements LineParser {
  private final Pattern pattern;
  private final List<String> groups;

  PatternLineParser(Pattern pattern, List<String> groups) {
    this.pattern = pattern;
    this.groups = List.copyOf(groups);
  }

  @Override
  public boolean parse(String line, Fields out) {
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
