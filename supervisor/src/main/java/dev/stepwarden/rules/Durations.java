package dev.stepwarden.rules;

import java.time.Duration;
import java.util.regex.Matcher;
import java.util.regex.Pattern;

/**
 * The one duration syntax of stepwarden, in guard files and on the command line alike: a number
 * (a fraction allowed) and a unit, {@code ms}, {@code s}, {@code m}, {@code h} or {@code d}
 * ({@code 500ms}, {@code 30s}, {@code 1.5h}); a bare number is seconds. At most a year.
 */
public final class Durations {
  private static final Pattern SYNTAX = Pattern.compile("(\\d+(?:\\.\\d+)?)\\s*(ms|s|m|h|d)?");
  private static final double MAX_MILLIS = 365.0 * 86_400_000;

  /** The words every refusal ends with. */
  public static final String EXAMPLES = "a duration such as 30s, 15m, 2h, 1d or 500ms";

  private Durations() {}

  /**
   * Parses {@code text}; an {@link IllegalArgumentException}'s message says what is wrong and
   * reads on from the name the caller puts before it (the option or the key).
   */
  public static Duration parse(String text) {
    Matcher m = SYNTAX.matcher(text.strip());
    if (!m.matches()) {
      throw new IllegalArgumentException("must be " + EXAMPLES + ", not '" + text + "'");
    }
    double amount = Double.parseDouble(m.group(1));
    String unit = m.group(2) == null ? "s" : m.group(2);
    double millis = amount * switch (unit) {
      case "ms" -> 1;
      case "s" -> 1_000;
      case "m" -> 60_000;
      case "h" -> 3_600_000;
      default -> 86_400_000;
    };
    if (millis > MAX_MILLIS) {
      throw new IllegalArgumentException("is " + text.strip() + "; at most a year is accepted");
    }
    return Duration.ofMillis(Math.round(millis));
  }

  /** {@link #parse} for a command-line option: the message names the option. */
  public static Duration option(String option, String text) {
    try {
      return parse(text);
    } catch (IllegalArgumentException e) {
      throw new IllegalArgumentException(option + " " + e.getMessage());
    }
  }
}
