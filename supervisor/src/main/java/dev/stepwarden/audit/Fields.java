package dev.stepwarden.audit;

import java.util.LinkedHashMap;
import java.util.Map;

/** An insertion-ordered map that keeps JSON nulls (the written form of "not known"). */
final class Fields {
  final Map<String, Object> map = new LinkedHashMap<>();

  Fields put(String key, Object value) {
    map.put(key, value);
    return this;
  }
}
