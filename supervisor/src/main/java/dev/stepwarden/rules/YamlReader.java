package dev.stepwarden.rules;

import java.io.IOException;
import java.io.InputStream;
import java.nio.charset.CharacterCodingException;
import java.nio.charset.CodingErrorAction;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.nio.file.attribute.BasicFileAttributes;
import java.nio.ByteBuffer;
import java.util.ArrayList;
import java.util.LinkedHashMap;
import java.util.List;
import java.util.Optional;
import org.snakeyaml.engine.v2.api.LoadSettings;
import org.snakeyaml.engine.v2.api.lowlevel.Parse;
import org.snakeyaml.engine.v2.events.AliasEvent;
import org.snakeyaml.engine.v2.events.CollectionStartEvent;
import org.snakeyaml.engine.v2.events.Event;
import org.snakeyaml.engine.v2.events.NodeEvent;
import org.snakeyaml.engine.v2.events.ScalarEvent;
import org.snakeyaml.engine.v2.exceptions.Mark;
import org.snakeyaml.engine.v2.exceptions.MarkedYamlEngineException;
import org.snakeyaml.engine.v2.exceptions.YamlEngineException;
import tools.jackson.core.JacksonException;
import tools.jackson.core.JsonParser;
import tools.jackson.core.JsonToken;
import tools.jackson.core.TokenStreamLocation;
import tools.jackson.dataformat.yaml.YAMLMapper;
import tools.jackson.dataformat.yaml.YAMLParser;

/**
 * Reads a guard file into a {@link ConfigNode} tree, refusing what a guard file never needs.
 *
 * <p>Refused up front, each with line:column: files over {@link #MAX_BYTES}, nesting deeper than
 * {@link #MAX_DEPTH}, anchors and aliases (Jackson hands an alias back as its anchor's name rather
 * than expanding it, so an alias would silently become a string, and alias bombs cost nothing to
 * refuse this way), duplicate keys, non-string keys and several documents in one file.
 */
final class YamlReader {
  static final int MAX_BYTES = 1 << 20;
  static final int MAX_DEPTH = 32;

  private static final YAMLMapper MAPPER = YAMLMapper.builder().build();

  private final Path file;

  YamlReader(Path file) {
    this.file = file;
  }

  ConfigNode read(byte[] bytes) throws ConfigException {
    if (bytes.length > MAX_BYTES) {
      throw new ConfigException(file, 1, 1, "the file is " + bytes.length
          + " bytes; a guard file may be at most " + MAX_BYTES + " bytes (1 MiB)");
    }
    String text;
    try {
      text = StandardCharsets.UTF_8.newDecoder()
          .onMalformedInput(CodingErrorAction.REPORT)
          .onUnmappableCharacter(CodingErrorAction.REPORT)
          .decode(ByteBuffer.wrap(bytes)).toString();
    } catch (CharacterCodingException e) {
      throw new ConfigException(file, 1, 1, "the file is not UTF-8 text; save it as UTF-8");
    }
    if (text.isBlank()) {
      throw new ConfigException(file, 1, 1,
          "the file is empty; a guard file needs at least a 'run' section with a command");
    }
    refuseTabIndentation(text);
    scanEvents(text);
    try (JsonParser parser = MAPPER.createParser(text)) {
      JsonToken first = parser.nextToken();
      if (first == null) {
        throw new ConfigException(file, 1, 1, "the file holds no YAML document");
      }
      ConfigNode root = node(parser, 1);
      if (parser.nextToken() != null) {
        TokenStreamLocation at = parser.currentTokenLocation();
        throw new ConfigException(file, at.getLineNr(), at.getColumnNr(),
            "a second YAML document starts here; a guard file holds exactly one");
      }
      return root;
    } catch (JacksonException e) {
      TokenStreamLocation at = e.getLocation();
      int line = at == null ? 1 : at.getLineNr();
      int col = at == null ? 1 : at.getColumnNr();
      String why = e.getOriginalMessage();
      // snakeyaml knows where the problem itself is; Jackson reports where its context began.
      if (e.getCause() instanceof MarkedYamlEngineException m && m.getProblemMark().isPresent()) {
        line = m.getProblemMark().get().getLine() + 1;
        col = m.getProblemMark().get().getColumn() + 1;
        why = m.getProblem();
      }
      int nl = why == null ? -1 : why.indexOf('\n');
      if (nl > 0) {
        why = why.substring(0, nl);
      }
      throw new ConfigException(file, line, col,
          "this is not valid YAML (" + why + "); check the indentation and quotes");
    }
  }

  /**
   * Walks snakeyaml's event stream before anything is built and refuses anchors, aliases and
   * explicit tags ({@code !!java/object}, {@code !!str}, {@code !custom}): Jackson reports neither
   * an anchor on a scalar nor a tag, so a scan of its tokens alone lets both through. Events are
   * not expanded, so an alias bomb costs one pass over the text. A syntax error ends the scan;
   * the Jackson pass below then reports it with its place.
   */
  private void scanEvents(String text) throws ConfigException {
    LoadSettings settings = LoadSettings.builder().setMaxAliasesForCollections(Integer.MAX_VALUE)
        .setCodePointLimit(MAX_BYTES + 1).build();
    try {
      for (Event e : new Parse(settings).parseString(text)) {
        Mark m = e.getStartMark().orElse(null);
        int line = m == null ? 1 : m.getLine() + 1;
        int col = m == null ? 1 : m.getColumn() + 1;
        if (e instanceof AliasEvent a) {
          throw new ConfigException(file, line, col, "YAML aliases (*"
              + a.getAlias().getValue() + ") are not accepted in a guard file; write the value out in full");
        }
        if (e instanceof NodeEvent n && n.getAnchor().isPresent()) {
          throw new ConfigException(file, line, col, "YAML anchors (&"
              + n.getAnchor().get().getValue() + ") are not accepted in a guard file; write the value out in full");
        }
        Optional<String> tag = e instanceof ScalarEvent s ? s.getTag()
            : e instanceof CollectionStartEvent c ? c.getTag() : Optional.empty();
        if (tag.isPresent()) {
          String shown = tag.get().replace("tag:yaml.org,2002:", "!!");
          throw new ConfigException(file, line, col, "YAML tags (" + shown + ") are not"
              + " accepted in a guard file; nothing in it is ever turned into an object or"
              + " evaluated: remove the tag and write the plain value");
        }
      }
    } catch (YamlEngineException e) {
      // not valid YAML: the Jackson pass gives the message with its place
    }
  }

  /** YAML forbids tabs in indentation; say so plainly instead of a scanner error. */
  private void refuseTabIndentation(String text) throws ConfigException {
    int line = 1;
    boolean atLineStart = true;
    int col = 1;
    for (int i = 0; i < text.length(); i++) {
      char c = text.charAt(i);
      if (c == '\n') {
        line++;
        col = 1;
        atLineStart = true;
        continue;
      }
      if (atLineStart && c == '\t') {
        throw new ConfigException(file, line, col,
            "this line is indented with a tab; YAML needs spaces for indentation");
      }
      if (c != ' ') {
        atLineStart = false;
      }
      col++;
    }
  }

  ConfigNode read() throws ConfigException {
    try {
      // A device or a FIFO has no size to trust (/dev/zero never ends, a FIFO blocks on open):
      // only a regular file is opened, and never more than the bound is read from it.
      BasicFileAttributes a = Files.readAttributes(file, BasicFileAttributes.class);
      if (!a.isRegularFile()) {
        throw new ConfigException(file, 1, 1, "not a regular file ("
            + (a.isDirectory() ? "a folder" : "a device, FIFO or socket")
            + "); give the path of a guard file saved on disk");
      }
      byte[] bytes;
      try (InputStream in = Files.newInputStream(file)) {
        bytes = in.readNBytes(MAX_BYTES + 1);
      }
      if (bytes.length > MAX_BYTES) {
        throw new ConfigException(file, 1, 1, "the file is larger than " + MAX_BYTES
            + " bytes; a guard file may be at most " + MAX_BYTES + " bytes (1 MiB)");
      }
      return read(bytes);
    } catch (IOException e) {
      throw new ConfigException(file, 1, 1, "cannot read the guard file: " + e.getMessage());
    }
  }

  private ConfigNode node(JsonParser p, int depth) throws ConfigException {
    TokenStreamLocation at = p.currentTokenLocation();
    int line = at.getLineNr();
    int col = at.getColumnNr();
    if (depth > MAX_DEPTH) {
      throw new ConfigException(file, line, col,
          "nesting is deeper than " + MAX_DEPTH + " levels; a guard file needs far fewer");
    }
    refuseAnchors(p, line, col);
    JsonToken t = p.currentToken();
    switch (t) {
      case START_OBJECT: {
        LinkedHashMap<String, ConfigNode> entries = new LinkedHashMap<>();
        LinkedHashMap<String, int[]> keys = new LinkedHashMap<>();
        while (p.nextToken() == JsonToken.PROPERTY_NAME) {
          TokenStreamLocation k = p.currentTokenLocation();
          String name = p.currentName();
          refuseAnchors(p, k.getLineNr(), k.getColumnNr());
          if (keys.containsKey(name)) {
            int[] first = keys.get(name);
            throw new ConfigException(file, k.getLineNr(), k.getColumnNr(), "the key '" + name
                + "' appears twice in this mapping (first at line " + first[0]
                + "); keep one of them");
          }
          keys.put(name, new int[] {k.getLineNr(), k.getColumnNr()});
          p.nextToken();
          entries.put(name, node(p, depth + 1));
        }
        return new ConfigNode.MapNode(line, col, entries, keys);
      }
      case START_ARRAY: {
        List<ConfigNode> items = new ArrayList<>();
        while (p.nextToken() != JsonToken.END_ARRAY) {
          items.add(node(p, depth + 1));
        }
        return new ConfigNode.ListNode(line, col, items);
      }
      case VALUE_STRING:
        return new ConfigNode.Scalar(line, col, p.getString(), ConfigNode.Scalar.Type.STRING);
      case VALUE_NUMBER_INT:
      case VALUE_NUMBER_FLOAT:
        return new ConfigNode.Scalar(line, col, p.getString(), ConfigNode.Scalar.Type.NUMBER);
      case VALUE_TRUE:
      case VALUE_FALSE:
        return new ConfigNode.Scalar(line, col, p.getString(), ConfigNode.Scalar.Type.BOOLEAN);
      case VALUE_NULL:
        return new ConfigNode.Scalar(line, col, null, ConfigNode.Scalar.Type.NULL);
      default:
        throw new ConfigException(file, line, col, "unexpected YAML content (" + t
            + "); a guard file holds only mappings, lists, text and numbers");
    }
  }

  private void refuseAnchors(JsonParser p, int line, int col) throws ConfigException {
    if (p instanceof YAMLParser y) {
      if (y.isCurrentAlias()) {
        throw new ConfigException(file, line, col, "YAML aliases (*name) are not accepted in a"
            + " guard file; write the value out in full");
      }
      if (y.getObjectId() != null) {
        throw new ConfigException(file, line, col, "YAML anchors (&" + y.getObjectId()
            + ") are not accepted in a guard file; write the value out in full");
      }
    }
  }
}
