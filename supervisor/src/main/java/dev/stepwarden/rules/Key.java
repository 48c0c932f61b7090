package dev.stepwarden.rules;

import dev.stepwarden.detectors.Param;
import java.util.List;
import java.util.Objects;

/**
 * One accepted key of the guard file: its type, default, range and a plain description.
 *
 * <p>The loader validates against these descriptors and {@code stepwarden schema} renders them,
 * so the JSON Schema cannot drift from what the loader accepts.
 */
record Key(String name, Kind kind, Object defaultValue, double min, boolean minOpen, double max,
    boolean maxOpen, boolean required, List<String> choices, String doc) {

  enum Kind {
    /** Any finite number. */
    NUMBER,
    /** A whole number. */
    INTEGER,
    /** Text. */
    STRING,
    /** One of {@link Key#choices}. */
    CHOICE,
    /** {@code 15m}, {@code 30s}, {@code 2h}, {@code 500ms}, or a number of seconds. */
    DURATION,
    /** {@code 0.5%} or a plain fraction such as {@code 0.005}. */
    FRACTION,
    /** {@code 3x} or a plain number. */
    FACTOR,
    /** A list of text items. */
    STRING_LIST,
    /** A mapping of text to text. */
    STRING_MAP
  }

  Key {
    Objects.requireNonNull(name, "name");
    Objects.requireNonNull(kind, "kind");
    choices = choices == null ? List.of() : List.copyOf(choices);
  }

  static Key number(String name, Double dflt, double min, double max, String doc) {
    return new Key(name, Kind.NUMBER, dflt, min, false, max, false, dflt == null, null, doc);
  }

  static Key integer(String name, Integer dflt, long min, long max, String doc) {
    return new Key(name, Kind.INTEGER, dflt, min, false, max, false, dflt == null, null, doc);
  }

  static Key text(String name, String dflt, String doc) {
    return new Key(name, Kind.STRING, dflt, 0, false, 0, false, false, null, doc);
  }

  static Key requiredText(String name, String doc) {
    return new Key(name, Kind.STRING, null, 0, false, 0, false, true, null, doc);
  }

  static Key choice(String name, String dflt, List<String> choices, String doc) {
    return new Key(name, Kind.CHOICE, dflt, 0, false, 0, false, dflt == null, choices, doc);
  }

  static Key duration(String name, String dflt, String doc) {
    return new Key(name, Kind.DURATION, dflt, 0, false, 0, false, dflt == null, null, doc);
  }

  static Key fraction(String name, Double dflt, double min, double max, String doc) {
    return new Key(name, Kind.FRACTION, dflt, min, false, max, false, dflt == null, null, doc);
  }

  static Key factor(String name, Double dflt, double min, double max, String doc) {
    return new Key(name, Kind.FACTOR, dflt, min, false, max, false, dflt == null, null, doc);
  }

  static Key list(String name, String doc) {
    return new Key(name, Kind.STRING_LIST, null, 0, false, 0, false, false, null, doc);
  }

  static Key map(String name, String doc) {
    return new Key(name, Kind.STRING_MAP, null, 0, false, 0, false, false, null, doc);
  }

  /** A detector's parameter, with its exact range, as the loader and the schema read keys. */
  static Key of(Param p) {
    Kind kind = switch (p.kind()) {
      case NUMBER -> Kind.NUMBER;
      case INTEGER -> Kind.INTEGER;
      case FRACTION -> Kind.FRACTION;
      case FACTOR -> Kind.FACTOR;
      case CHOICE -> Kind.CHOICE;
    };
    return new Key(p.name(), kind, p.defaultValue(), p.min(), p.minOpen(), p.max(), p.maxOpen(),
        p.required(), p.choices(), p.doc());
  }

  /** Whether {@code v} lies in the range (open ends excluded). */
  boolean accepts(double v) {
    return (minOpen ? v > min : v >= min) && (maxOpen ? v < max : v <= max);
  }

  /** The range in words. */
  String range() {
    if (min == Double.MIN_NORMAL) {
      return "above 0 and at most " + num(max);
    }
    if (!minOpen && !maxOpen) {
      return "between " + num(min) + " and " + num(max);
    }
    return (minOpen ? "above " : "at least ") + num(min) + " and "
        + (maxOpen ? "below " : "at most ") + num(max);
  }

  private String num(double v) {
    return kind == Kind.INTEGER ? Long.toString((long) v) : Param.num(v);
  }

  Key optional() {
    return new Key(name, kind, defaultValue, min, minOpen, max, maxOpen, false, choices, doc);
  }
}
