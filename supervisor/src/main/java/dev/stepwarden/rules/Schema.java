package dev.stepwarden.rules;

import dev.stepwarden.detectors.DetectorKind;
import java.util.ArrayList;
import java.util.LinkedHashMap;
import java.util.List;
import java.util.Map;
import tools.jackson.databind.SerializationFeature;
import tools.jackson.databind.json.JsonMapper;

/**
 * The JSON Schema (draft 2020-12) of the guard file, generated from {@link Catalogue}: the same
 * descriptors the loader validates against, so the two cannot drift apart.
 */
public final class Schema {
  private Schema() {}

  public static String json() {
    return JsonMapper.builder().enable(SerializationFeature.INDENT_OUTPUT).build()
        .writeValueAsString(tree());
  }

  static Map<String, Object> tree() {
    Map<String, Object> root = new LinkedHashMap<>();
    root.put("$schema", "https://json-schema.org/draft/2020-12/schema");
    root.put("$id", "https://stepwarden.dev/schema/guard-file.json");
    root.put("title", "stepwarden guard file");
    root.put("type", "object");
    root.put("additionalProperties", false);
    root.put("required", List.of("run"));
    Map<String, Object> props = new LinkedHashMap<>();
    props.put("run", object(Catalogue.RUN, ordered()));
    props.put("read", object(Catalogue.READ, ordered("also", ordered("type", "array",
        "description", "Further sources read at the same time (e.g. validation in a CSV file).",
        "items", object(Catalogue.READ_ALSO, ordered())))));
    props.put("steer", object(Catalogue.STEER, ordered()));
    props.put("checkpoints", object(Catalogue.CHECKPOINTS, ordered()));
    props.put("probe", object(Catalogue.PROBE, ordered()));
    props.put("limits", object(Catalogue.LIMITS,
        ordered("learning_rate", object(Catalogue.RATE_LIMITS, ordered()))));
    Map<String, Object> guards = new LinkedHashMap<>();
    guards.put("type", "array");
    guards.put("description", "Evaluated in file order on each new sample of the series they"
        + " watch; at most one intervention per sample.");
    Map<String, Object> when = new LinkedHashMap<>();
    when.put("type", "object");
    when.put("minProperties", 1);
    when.put("maxProperties", 1);
    when.put("additionalProperties", false);
    Map<String, Object> detectors = new LinkedHashMap<>();
    for (DetectorKind d : DetectorKind.values()) {
      Map<String, Object> o = object(Catalogue.detectorKeys(d), ordered());
      o.put("description", "Fires when " + d.doc() + "." + (d.divergence()
          ? " Its firing counts as divergence." : ""));
      o.put("type", List.of("object", "null"));
      detectors.put(d.key(), o);
    }
    when.put("properties", detectors);
    Map<String, Object> guard = object(Catalogue.GUARD, ordered("when", when, "do", actions()));
    @SuppressWarnings("unchecked")
    List<String> req = new ArrayList<>((List<String>) guard.getOrDefault("required", List.of()));
    req.add("when");
    req.add("do");
    guard.put("required", req);
    guards.put("items", guard);
    props.put("guards", guards);
    root.put("properties", props);
    return root;
  }

  private static Map<String, Object> actions() {
    Map<String, Object> named = new LinkedHashMap<>();
    named.put("type", "string");
    named.put("enum", List.of("rewind", "stop", "give_up"));
    List<Object> oneOf = new ArrayList<>();
    oneOf.add(named);
    oneOf.add(single("scale", factor("Multiply the rate by this factor (0.5 or 0.5x).")));
    oneOf.add(single("set_rate", ordered("type", "number", "exclusiveMinimum", 0)));
    Map<String, Object> skip = new LinkedHashMap<>();
    skip.put("type", "object");
    skip.put("additionalProperties", false);
    skip.put("properties", ordered("skip_batches", ordered("type", "integer", "minimum", 0)));
    oneOf.add(single("rewind", skip));
    Map<String, Object> one = ordered("oneOf", oneOf);
    Map<String, Object> a = new LinkedHashMap<>();
    a.put("description", "One action or a list: scale, set_rate, rewind, stop, give_up.");
    a.put("oneOf", List.of(one, ordered("type", "array", "minItems", 1, "items", one)));
    return a;
  }

  /** Like Map.of, but in the order written: Map.of iterates in a per-JVM random order. */
  private static Map<String, Object> ordered(Object... keysAndValues) {
    Map<String, Object> m = new LinkedHashMap<>();
    for (int i = 0; i < keysAndValues.length; i += 2) {
      m.put((String) keysAndValues[i], keysAndValues[i + 1]);
    }
    return m;
  }

  private static Map<String, Object> single(String key, Map<String, Object> value) {
    Map<String, Object> o = new LinkedHashMap<>();
    o.put("type", "object");
    o.put("additionalProperties", false);
    o.put("required", List.of(key));
    o.put("properties", ordered(key, value));
    return o;
  }

  private static Map<String, Object> factor(String doc) {
    Map<String, Object> o = new LinkedHashMap<>();
    o.put("description", doc);
    o.put("oneOf", List.of(ordered("type", "number", "exclusiveMinimum", 0),
        ordered("type", "string", "pattern", "^[0-9.eE+-]+\\s*x$")));
    return o;
  }

  private static Map<String, Object> object(List<Key> keys, Map<String, Object> nested) {
    Map<String, Object> o = new LinkedHashMap<>();
    o.put("type", "object");
    o.put("additionalProperties", false);
    Map<String, Object> props = new LinkedHashMap<>();
    List<String> required = new ArrayList<>();
    for (Key k : keys) {
      props.put(k.name(), property(k));
      if (k.required()) {
        required.add(k.name());
      }
    }
    props.putAll(nested);
    o.put("properties", props);
    if (!required.isEmpty()) {
      o.put("required", required);
    }
    return o;
  }

  private static Map<String, Object> property(Key k) {
    Map<String, Object> p = new LinkedHashMap<>();
    p.put("description", k.doc());
    switch (k.kind()) {
      case NUMBER -> {
        p.put("type", "number");
        p.putAll(bounds(k));
      }
      case INTEGER -> {
        p.put("type", "integer");
        p.put("minimum", (long) k.min());
        p.put("maximum", (long) k.max());
      }
      case STRING -> p.put("type", "string");
      case CHOICE -> p.put("enum", k.choices());
      case DURATION -> p.put("oneOf", List.of(ordered("type", "number", "minimum", 0),
          ordered("type", "string", "pattern", "^\\d+(\\.\\d+)?\\s*(ms|s|m|h|d)?$")));
      case FRACTION -> p.put("oneOf", List.of(
          number(k), ordered("type", "string", "pattern", "^[0-9.eE+-]+\\s*%$")));
      case FACTOR -> p.put("oneOf", List.of(
          number(k), ordered("type", "string", "pattern", "^[0-9.eE+-]+\\s*x$")));
      case STRING_LIST -> p.put("type", "array");
      case STRING_MAP -> {
        p.put("type", "object");
        p.put("additionalProperties", ordered("type", "string"));
      }
      default -> throw new IllegalStateException(k.kind().toString());
    }
    if (k.kind() == Key.Kind.STRING_LIST) {
      p.put("items", ordered("type", "string"));
      p.put("minItems", 1);
    }
    if (k.defaultValue() != null) {
      p.put("default", k.defaultValue());
    }
    return p;
  }

  private static Map<String, Object> number(Key k) {
    Map<String, Object> m = ordered("type", "number");
    m.putAll(bounds(k));
    return m;
  }

  /** JSON Schema bounds: an open end is an exclusive bound (2020-12, s6.2.3 and s6.2.5). */
  private static Map<String, Object> bounds(Key k) {
    Map<String, Object> m = new LinkedHashMap<>();
    m.put(k.minOpen() ? "exclusiveMinimum" : "minimum", k.min());
    m.put(k.maxOpen() ? "exclusiveMaximum" : "maximum", k.max());
    return m;
  }
}
