package dev.stepwarden.metrics;

import tools.jackson.core.JacksonException;
import tools.jackson.core.JsonParser;
import tools.jackson.core.JsonToken;
import tools.jackson.core.json.JsonReadFeature;
import tools.jackson.databind.json.JsonMapper;

/**
 * Test oracle and benchmark baseline: the first cut of the JSON reader, on Jackson streaming.
 *
 * JSON lines: one object per line; nested objects are addressed by dotted keys ({@code val.loss});
 * numbers and the non-finite spellings (bare {@code NaN}, or strings such as {@code "nan"}) are
 * read, everything else is passed over.
 */
final class JacksonJsonLineParser implements LineParser {
  private static final JsonMapper MAPPER = JsonMapper.builder()
      .enable(JsonReadFeature.ALLOW_NON_NUMERIC_NUMBERS)
      .enable(JsonReadFeature.ALLOW_LEADING_PLUS_SIGN_FOR_NUMBERS)
      .build();

  @Override
  public boolean parse(String line, Fields out) {
    int start = 0;
    while (start < line.length() && Character.isWhitespace(line.charAt(start))) {
      start++;
    }
    if (start >= line.length() || line.charAt(start) != '{') {
      return false;
    }
    boolean any = false;
    try (JsonParser p = MAPPER.createParser(line)) {
      if (p.nextToken() != JsonToken.START_OBJECT) {
        return false;
      }
      StringBuilder prefix = new StringBuilder();
      int[] marks = new int[64];
      int depth = 0;
      JsonToken t;
      while ((t = p.nextToken()) != null) {
        switch (t) {
          case PROPERTY_NAME:
            break;
          case START_OBJECT:
            if (depth == marks.length) {
              return any;
            }
            marks[depth++] = prefix.length();
            prefix.append(p.currentName()).append('.');
            break;
          case END_OBJECT:
            if (depth == 0) {
              return any;
            }
            prefix.setLength(marks[--depth]);
            break;
          case START_ARRAY:
            p.skipChildren();
            break;
          case VALUE_NUMBER_INT:
          case VALUE_NUMBER_FLOAT:
            out.put(prefix + p.currentName(), p.getDoubleValue());
            any = true;
            break;
          case VALUE_STRING: {
            Double v = nonFinite(p.getString());
            if (v != null) {
              out.put(prefix + p.currentName(), v);
              any = true;
            }
            break;
          }
          default:
            break;
        }
      }
    } catch (JacksonException e) {
      return any;
    }
    return any;
  }

  private static Double nonFinite(String s) {
    Double v = number(s);
    return v != null && !Double.isFinite(v) ? v : null;
  }

  /** Reads the common spellings of numbers, including non-finite ones; null if not. */
  private static Double number(String text) {
    String t = text.trim();
    if (t.isEmpty()) {
      return null;
    }
    switch (t.toLowerCase(java.util.Locale.ROOT)) {
      case "nan":
      case "+nan":
      case "-nan":
        return Double.NaN;
      case "inf":
      case "+inf":
      case "infinity":
      case "+infinity":
        return Double.POSITIVE_INFINITY;
      case "-inf":
      case "-infinity":
        return Double.NEGATIVE_INFINITY;
      default:
        break;
    }
    char c = t.charAt(0);
    if (!(c == '-' || c == '+' || c == '.' || (c >= '0' && c <= '9'))) {
      return null;
    }
    try {
      return Double.parseDouble(t);
    } catch (NumberFormatException e) {
      return null;
    }
  }
}
