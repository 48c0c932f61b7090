package dev.stepwarden.detectors;

import java.util.List;
import java.util.Locale;
import java.util.Objects;

/**
 * One parameter of a detector, with its exact range: the loader, the JSON Schema, {@code check}
 * and the detector's constructor all read the bounds from here, so a value one accepts the others
 * accept too.
 *
 * @param name the guard-file key
 * @param kind how it is written
 * @param defaultValue the default, or null when the parameter is required (or, with {@code
 *     optional}, has a default that depends on another parameter)
 * @param min lower bound
 * @param minOpen whether {@code min} itself is excluded
 * @param max upper bound
 * @param maxOpen whether {@code max} itself is excluded
 * @param choices the accepted words of a {@link Kind#CHOICE}
 * @param optional true when a missing value is allowed without a default
 * @param doc one plain sentence for the schema and the reference
 */
public record Param(String name, Kind kind, Object defaultValue, double min, boolean minOpen,
    double max, boolean maxOpen, List<String> choices, boolean optional, String doc) {

  /** How a parameter is written in the guard file. */
  public enum Kind {
    /** A finite number. */
    NUMBER,
    /** A whole number. */
    INTEGER,
    /** {@code 0.5%} or a plain fraction. */
    FRACTION,
    /** {@code 3x} or a plain number. */
    FACTOR,
    /** One of the listed words. */
    CHOICE
  }

  public Param {
    Objects.requireNonNull(name, "name");
    Objects.requireNonNull(kind, "kind");
    choices = choices == null ? List.of() : List.copyOf(choices);
  }

  static Param number(String name, Double dflt, double min, boolean minOpen, double max,
      boolean maxOpen, String doc) {
    return new Param(name, Kind.NUMBER, dflt, min, minOpen, max, maxOpen, null, false, doc);
  }

  static Param integer(String name, Integer dflt, long min, long max, String doc) {
    return new Param(name, Kind.INTEGER, dflt, min, false, max, false, null, false, doc);
  }

  static Param fraction(String name, Double dflt, double min, boolean minOpen, double max,
      boolean maxOpen, String doc) {
    return new Param(name, Kind.FRACTION, dflt, min, minOpen, max, maxOpen, null, false, doc);
  }

  static Param factor(String name, Double dflt, double min, boolean minOpen, double max,
      String doc) {
    return new Param(name, Kind.FACTOR, dflt, min, minOpen, max, false, null, false, doc);
  }

  static Param choice(String name, String dflt, List<String> choices, String doc) {
    return new Param(name, Kind.CHOICE, dflt, 0, false, 0, false, choices, false, doc);
  }

  /** The same parameter, allowed to be missing although it has no default. */
  Param orMissing() {
    return new Param(name, kind, defaultValue, min, minOpen, max, maxOpen, choices, true, doc);
  }

  /** Whether the guard file must give it. */
  public boolean required() {
    return defaultValue == null && !optional;
  }

  /** Whether {@code v} lies in the range (never true for NaN). */
  public boolean accepts(double v) {
    if (kind == Kind.INTEGER && v != Math.rint(v)) {
      return false;
    }
    return (minOpen ? v > min : v >= min) && (maxOpen ? v < max : v <= max);
  }

  /** The range in words, e.g. "above 0 and below 1" or "between 4 and 200". */
  public String range() {
    if (!minOpen && !maxOpen) {
      return "between " + num(min) + " and " + num(max);
    }
    return (minOpen ? "above " : "at least ") + num(min) + " and "
        + (maxOpen ? "below " : "at most ") + num(max);
  }

  /** The constructors' check: the same range, as an argument error. */
  double require(double v) {
    if (!accepts(v)) {
      throw new IllegalArgumentException(name + " must be " + range() + ", got " + v);
    }
    return v;
  }

  int requireInt(long v) {
    require(v);
    return (int) v;
  }

  /** A number as a reader writes it: 5, 0.75, 1e-04 (six significant digits at most). */
  public static String num(double v) {
    return v == Math.rint(v) && Math.abs(v) < 1e9 ? Long.toString((long) v)
        : String.format(Locale.ROOT, "%.6g", v).replaceAll("0+(e|$)", "$1")
            .replaceAll("\\.(e|$)", "$1");
  }
}
