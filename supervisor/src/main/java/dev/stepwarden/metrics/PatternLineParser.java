package dev.stepwarden.metrics;

import java.util.Map;
import java.util.regex.Matcher;
import java.util.regex.Pattern;

/**
 * The user's regular expression; each named group that holds a number fills its key (see
 * {@link MetricPatterns}: a group's name in the compiled pattern may stand for the key). Lines
 * longer than {@link #MAX_CHARS} are passed over: a pattern that backtracks badly on a long line
 * would otherwise stall the pump thread (metric lines are short; such lines are counted ignored).
 */
final class PatternLineParser implements LineParser {
  static final int MAX_CHARS = 64 * 1024;

  private final Pattern pattern;
  private final String[] groups;
  private final String[] keys;

  PatternLineParser(Pattern pattern) {
    this.pattern = pattern;
    Map<String, String> byGroup = MetricPatterns.keysByGroup(pattern);
    this.groups = byGroup.keySet().toArray(new String[0]);
    this.keys = byGroup.values().toArray(new String[0]);
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
    for (int k = 0; k < groups.length; k++) {
      String g = groups[k];
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
        out.put(keys[k], v);
        any = true;
      }
    }
    return any;
  }
}
