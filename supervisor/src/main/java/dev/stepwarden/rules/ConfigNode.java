package dev.stepwarden.rules;

import java.util.Collections;
import java.util.LinkedHashMap;
import java.util.List;
import java.util.Map;

/**
 * A YAML node with the line and column it came from. Jackson's tree model drops locations, and
 * every refusal must name line:column, so the loader builds this small tree from parser events.
 */
abstract sealed class ConfigNode permits ConfigNode.MapNode, ConfigNode.ListNode, ConfigNode.Scalar {
  final int line;
  final int column;

  ConfigNode(int line, int column) {
    this.line = line;
    this.column = column;
  }

  abstract String kind();

  static final class MapNode extends ConfigNode {
    /** Entries in file order; each key keeps its own position for "unknown key" messages. */
    final Map<String, ConfigNode> entries;

    final Map<String, int[]> keyPositions;

    MapNode(int line, int column, LinkedHashMap<String, ConfigNode> entries,
        LinkedHashMap<String, int[]> keyPositions) {
      super(line, column);
      this.entries = Collections.unmodifiableMap(entries);
      this.keyPositions = Collections.unmodifiableMap(keyPositions);
    }

    @Override
    String kind() {
      return "a mapping";
    }
  }

  static final class ListNode extends ConfigNode {
    final List<ConfigNode> items;

    ListNode(int line, int column, List<ConfigNode> items) {
      super(line, column);
      this.items = List.copyOf(items);
    }

    @Override
    String kind() {
      return "a list";
    }
  }

  /** A scalar; {@code text} is null for YAML null. {@code quoted} scalars never become numbers. */
  static final class Scalar extends ConfigNode {
    enum Type { STRING, NUMBER, BOOLEAN, NULL }

    final String text;
    final Type type;

    Scalar(int line, int column, String text, Type type) {
      super(line, column);
      this.text = text;
      this.type = type;
    }

    @Override
    String kind() {
      return switch (type) {
        case STRING -> "the text '" + text + "'";
        case NUMBER -> "the number " + text;
        case BOOLEAN -> "the boolean " + text;
        case NULL -> "an empty value";
      };
    }
  }
}
