package dev.stepwarden.metrics;

import java.util.ArrayList;
import java.util.Collections;
import java.util.HexFormat;
import java.util.LinkedHashMap;
import java.util.List;
import java.util.Map;
import java.nio.charset.StandardCharsets;
import java.util.regex.Matcher;
import java.util.regex.Pattern;
import java.util.regex.PatternSyntaxException;

/**
 * The user's {@code read.pattern}: a Java regular expression that also takes Python's named
 * groups {@code (?P<name>...)} and back-references {@code (?P=name)}, with any key name as a group
 * name ({@code val_loss}, {@code top-1}). Java allows only letters and digits in group names, so
 * a name it would refuse is carried in the compiled pattern as {@code swk} plus the hex of its
 * UTF-8 bytes and read back by {@link #keysByGroup}: the compiled pattern alone says which key each
 * group fills, and {@link ReadPlan} keeps its one {@code Pattern}.
 */
public final class MetricPatterns {
  private static final String PREFIX = "swk";
  private static final Pattern JAVA_NAME = Pattern.compile("[a-zA-Z][a-zA-Z0-9]*");
  private static final Pattern ENCODED = Pattern.compile(PREFIX + "((?:[0-9a-f]{2})+)");
  private static final Pattern GROUP = Pattern.compile("\\(\\?<([a-zA-Z][a-zA-Z0-9]*)>");

  private MetricPatterns() {}

  /** A pattern that does not compile; the message names the position and the fix. */
  public static final class BadPattern extends Exception {
    private static final long serialVersionUID = 1L;

    BadPattern(String message) {
      super(message);
    }
  }

  /** Compiles the user's pattern text (Java or Python named-group syntax). */
  public static Pattern compile(String text) throws BadPattern {
    StringBuilder out = new StringBuilder(text.length() + 16);
    List<Integer> origin = new ArrayList<>(text.length() + 16);
    int i = 0;
    int n = text.length();
    while (i < n) {
      char c = text.charAt(i);
      if (c == '\\' && i + 1 < n) {
        if (text.startsWith("\\k<", i)) {
          i = backReference(text, i, i + 3, '>', out, origin);
          continue;
        }
        i = emit(out, origin, text.substring(i, i + 2), i, i + 1);
        continue;
      }
      if (c == '[') {
        int end = classEnd(text, i);
        i = emit(out, origin, text.substring(i, end), i, end - 1);
        continue;
      }
      if (c == '(' && text.startsWith("(?P<", i)) {
        i = group(text, i, i + 4, out, origin);
        continue;
      }
      if (c == '(' && text.startsWith("(?<", i) && i + 3 < n && text.charAt(i + 3) != '='
          && text.charAt(i + 3) != '!') {
        i = group(text, i, i + 3, out, origin);
        continue;
      }
      if (c == '(' && text.startsWith("(?P=", i)) {
        i = backReference(text, i, i + 4, ')', out, origin);
        continue;
      }
      i = emit(out, origin, String.valueOf(c), i, i);
    }
    try {
      return Pattern.compile(out.toString());
    } catch (PatternSyntaxException e) {
      int at = e.getIndex() < 0 ? 0
          : e.getIndex() >= origin.size() ? n : origin.get(e.getIndex());
      throw bad(text, at, e.getDescription(), fix(e.getDescription()));
    }
  }

  /** The keys the pattern's named groups fill, in pattern order. */
  public static List<String> keys(Pattern p) {
    return List.copyOf(keysByGroup(p).values());
  }

  /** Group name in the compiled pattern to the key it fills, in pattern order. */
  static Map<String, String> keysByGroup(Pattern p) {
    Map<String, String> out = new LinkedHashMap<>();
    Matcher m = GROUP.matcher(p.pattern());
    while (m.find()) {
      String g = m.group(1);
      Matcher enc = ENCODED.matcher(g);
      out.put(g, enc.matches() ? new String(HexFormat.of().parseHex(enc.group(1)),
          StandardCharsets.UTF_8) : g);
    }
    return Collections.unmodifiableMap(out);
  }

  private static int group(String text, int start, int nameFrom, StringBuilder out,
      List<Integer> origin) throws BadPattern {
    int close = text.indexOf('>', nameFrom);
    if (close < 0) {
      throw bad(text, start, "the group name is not closed with '>'",
          "write (?P<key>...) or (?<key>...) with the trainer's key as the name");
    }
    String name = text.substring(nameFrom, close);
    if (name.isEmpty()) {
      throw bad(text, start, "the group has an empty name",
          "write (?P<key>...) with the trainer's key as the name");
    }
    return emit(out, origin, "(?<" + javaName(name) + ">", start, close);
  }

  /** {@code \\k<name>} or {@code (?P=name)}, the name from {@code nameFrom} to {@code end}. */
  private static int backReference(String text, int start, int nameFrom, char end,
      StringBuilder out, List<Integer> origin) throws BadPattern {
    int close = text.indexOf(end, nameFrom);
    if (close < 0) {
      throw bad(text, start, "the back-reference is not closed with '" + end + "'",
          "write (?P=name) or \\k<name> with the name of an earlier group");
    }
    return emit(out, origin, "\\k<" + javaName(text.substring(nameFrom, close)) + ">", start,
        close);
  }

  private static String javaName(String key) {
    if (JAVA_NAME.matcher(key).matches() && !key.startsWith(PREFIX)) {
      return key;
    }
    return PREFIX + HexFormat.of().formatHex(key.getBytes(StandardCharsets.UTF_8));
  }

  /** Appends {@code piece} standing for {@code text[from, to]}; returns the next index. */
  private static int emit(StringBuilder out, List<Integer> origin, String piece, int from,
      int to) {
    for (int k = 0; k < piece.length(); k++) {
      origin.add(Math.min(from + k, to));
    }
    out.append(piece);
    return to + 1;
  }

  /** The index after a character class starting at {@code start} (or the text's end). */
  private static int classEnd(String text, int start) {
    int i = start + 1;
    if (i < text.length() && text.charAt(i) == '^') {
      i++;
    }
    if (i < text.length() && text.charAt(i) == ']') {
      i++; // a ']' first in a class is literal
    }
    int depth = 1;
    while (i < text.length()) {
      char c = text.charAt(i);
      if (c == '\\') {
        i += 2;
        continue;
      }
      if (c == '[') {
        depth++;
      } else if (c == ']' && --depth == 0) {
        return i + 1;
      }
      i++;
    }
    return text.length();
  }

  private static String fix(String description) {
    String d = description.toLowerCase(java.util.Locale.ROOT);
    if (d.contains("unclosed group")) {
      return "close each '(' with ')', or write a literal parenthesis as \\(";
    }
    if (d.contains("unmatched closing")) {
      return "remove the extra ')' or write a literal one as \\)";
    }
    if (d.contains("unclosed character class")) {
      return "close the '[' with ']', or write a literal bracket as \\[";
    }
    if (d.contains("dangling meta character")) {
      return "a * + or ? needs something before it; write a literal one as \\* \\+ \\?";
    }
    if (d.contains("unknown inline modifier")) {
      return "named groups are written (?P<key>...) or (?<key>...)";
    }
    if (d.contains("named capturing group") && d.contains("defined")) {
      return "give each group its own name (one group per key)";
    }
    return "escape a literal ( ) [ ] { } . * + ? | with a backslash";
  }

  private static BadPattern bad(String text, int at, String problem, String fix) {
    int shown = Math.max(0, Math.min(at, text.length()));
    // one line (a guard-file message is one line), the place marked with >> in the user's text
    return new BadPattern("the pattern is not a valid regular expression: " + problem
        + " at position " + (shown + 1) + " (marked >>): " + text.substring(0, shown) + ">>"
        + text.substring(shown) + "; fix: " + fix);
  }
}
