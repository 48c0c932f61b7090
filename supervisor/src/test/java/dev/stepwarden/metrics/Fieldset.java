package dev.stepwarden.metrics;

import java.util.LinkedHashMap;
import java.util.Map;

/** Collects what a parser put, in order, for assertions. */
final class Fieldset {
  private Fieldset() {}

  static Map<String, Double> parse(LineParser p, String line) {
    Map<String, Double> out = new LinkedHashMap<>();
    p.parse(line, out::put);
    return out;
  }
}
