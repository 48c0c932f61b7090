package dev.stepwarden.queue;

import java.util.Map;
import tools.jackson.core.JacksonException;
import tools.jackson.databind.JsonNode;
import tools.jackson.databind.node.ObjectNode;
import tools.jackson.dataformat.yaml.YAMLMapper;

/**
 * {@code --set key.path=value} on a guard file (queue add and run): the value is read as YAML, so numbers stay
 * numbers ({@code run.learning_rate=0.05}) and {@code run.env={SEED: 3}} sets a map. The result is
 * validated again by the guard-file loader, so an override can never smuggle in a bad key.
 */
public final class Overrides {
  private static final YAMLMapper YAML = YAMLMapper.builder().build();

  private Overrides() {}

  /** {@code yaml} with each {@code key.path=value} set; used by queue add and run --set. */
  public static String apply(String yaml, Map<String, String> sets) throws QueueException {
    JsonNode root;
    try {
      root = YAML.readTree(yaml);
    } catch (JacksonException e) {
      throw new QueueException("the guard file is not YAML: " + e.getOriginalMessage());
    }
    if (!(root instanceof ObjectNode top)) {
      throw new QueueException("the guard file must be a map of sections (run:, read:, ...)");
    }
    for (Map.Entry<String, String> e : sets.entrySet()) {
      String[] path = e.getKey().split("\\.");
      ObjectNode at = top;
      for (int i = 0; i < path.length - 1; i++) {
        JsonNode next = at.get(path[i]);
        if (next == null) {
          next = at.putObject(path[i]);
        } else if (!(next instanceof ObjectNode)) {
          throw new QueueException("--set " + e.getKey() + ": '" + path[i] + "' is not a section"
              + " of the guard file; address a key inside a map, e.g. run.learning_rate");
        }
        at = (ObjectNode) next;
      }
      JsonNode value;
      try {
        value = YAML.readTree(e.getValue().isEmpty() ? "''" : e.getValue());
      } catch (JacksonException ex) {
        throw new QueueException("--set " + e.getKey() + ": the value is not YAML: "
            + ex.getOriginalMessage());
      }
      at.set(path[path.length - 1], value);
    }
    return YAML.writeValueAsString(top);
  }
}
