package dev.stepwarden.rules;

import static org.assertj.core.api.Assertions.assertThat;

import dev.stepwarden.detectors.DetectorKind;
import java.util.List;
import java.util.Map;
import org.junit.jupiter.api.Test;

/** The schema is generated from the loader's own key catalogue: every accepted key appears. */
class SchemaTest {
  @SuppressWarnings("unchecked")
  static Map<String, Object> props(Map<String, Object> node) {
    return (Map<String, Object>) node.get("properties");
  }

  @SuppressWarnings("unchecked")
  static Map<String, Object> child(Map<String, Object> node, String key) {
    return (Map<String, Object>) props(node).get(key);
  }

  static void hasKeys(Map<String, Object> node, List<Key> keys) {
    for (Key k : keys) {
      assertThat(props(node)).as("schema property " + k.name()).containsKey(k.name());
    }
    assertThat(node).containsEntry("additionalProperties", false);
  }

  @Test
  @SuppressWarnings("unchecked")
  void everyKeyTheLoaderAcceptsIsInTheSchema() {
    Map<String, Object> root = Schema.tree();
    assertThat(props(root).keySet()).containsExactlyInAnyOrderElementsOf(Catalogue.TOP);
    hasKeys(child(root, "run"), Catalogue.RUN);
    hasKeys(child(root, "read"), Catalogue.READ);
    Map<String, Object> also = (Map<String, Object>) child(child(root, "read"), "also")
        .get("items");
    hasKeys(also, Catalogue.READ_ALSO);
    hasKeys(child(root, "steer"), Catalogue.STEER);
    hasKeys(child(root, "checkpoints"), Catalogue.CHECKPOINTS);
    hasKeys(child(root, "limits"), Catalogue.LIMITS);
    hasKeys(child(child(root, "limits"), "learning_rate"), Catalogue.RATE_LIMITS);
    Map<String, Object> guard = (Map<String, Object>) child(root, "guards").get("items");
    hasKeys(guard, Catalogue.GUARD);
    Map<String, Object> when = child(guard, "when");
    assertThat(props(when).keySet()).containsExactlyElementsOf(DetectorKind.keys());
    for (DetectorKind d : DetectorKind.values()) {
      hasKeys(child(when, d.key()), Catalogue.detectorKeys(d));
    }
  }
}
