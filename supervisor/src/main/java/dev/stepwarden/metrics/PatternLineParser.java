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
      String text;
      try {
        text = m.group(g);
      } catch (IllegalArgumentException e) {
        continue;
      }
      Double v = text == null ? null : LineParser.number(text);
      if (v != null) {
        out.put(g, v);
        any = true;
      }
    }
    return any;
  }
}
