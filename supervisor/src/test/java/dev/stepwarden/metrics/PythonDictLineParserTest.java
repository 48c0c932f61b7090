package dev.stepwarden.metrics;

import static org.assertj.core.api.Assertions.assertThat;

import java.nio.file.Files;
import java.nio.file.Path;
import java.util.ArrayList;
import java.util.LinkedHashMap;
import java.util.List;
import java.util.Map;
import org.junit.jupiter.api.Test;
import tools.jackson.databind.JsonNode;
import tools.jackson.databind.json.JsonMapper;

class PythonDictLineParserTest {
  private static final Path LOG = Path.of("src/test/resources/python-dict/trainer.log");

  /** Reads one line; the keys it put and the keys it found ambiguous (as "?key"). */
  private static Map<String, Double> read(String line) {
    Map<String, Double> out = new LinkedHashMap<>();
    new PythonDictLineParser().parse(line, new LineParser.Fields() {
      @Override
      public void put(String key, double value) {
        out.put(key, value);
      }

      @Override
      public void ambiguous(String key) {
        out.put("?" + key, Double.NaN);
      }
    });
    return out;
  }

  @Test
  void everyLineReadsAsPythonsOwnParserReadsIt() throws Exception {
    // The reference is what Python's parser made of each line (make_dict_log.py beside the log).
    List<String> lines = Files.readAllLines(LOG);
    List<String> expected = Files.readAllLines(Path.of(LOG + ".expected.jsonl"));
    assertThat(lines).hasSize(264).hasSameSizeAs(expected);
    JsonMapper json = JsonMapper.builder().build();
    for (int i = 0; i < lines.size(); i++) {
      Map<String, Double> want = new LinkedHashMap<>();
      JsonNode e = json.readTree(expected.get(i));
      for (Map.Entry<String, JsonNode> f : new ArrayList<>(e.properties())) {
        JsonNode v = f.getValue();
        want.put(f.getKey(), v.isString() ? Double.parseDouble(v.asString()
            .replace("inf", "Infinity").replace("nan", "NaN")) : v.asDouble());
      }
      assertThat(read(lines.get(i))).as("line %d: %s", i + 1, lines.get(i))
          .containsExactlyInAnyOrderEntriesOf(want);
    }
  }

  @Test
  void anAmbiguousNumberACutLineAndCallsAreNeverMisread() {
    assertThat(read("{'loss': 1,234.5, 'lr': 0.1}")).containsOnlyKeys("?loss");
    assertThat(read("{'step': 3, 'loss': 0.12")).containsOnlyKeys("step"); // cut: no delimiter
    assertThat(read("{'step': 3, 'loss': 0.1234}")).containsEntry("loss", 0.1234);
    assertThat(read("{'loss': np.float64(0.25), 'acc': tensor(0.5, device='cpu'), 'x': f(a)}"))
        .containsExactlyInAnyOrderEntriesOf(Map.of("loss", 0.25, "acc", 0.5));
    assertThat(read("{1: 2.0, 'k': [1, (2, 3)], 'v': -inf, \"it's\": 4}"))
        .containsExactlyInAnyOrderEntriesOf(Map.of("v", Double.NEGATIVE_INFINITY, "it's", 4.0));
    assertThat(read("no dict here")).isEmpty();
  }
}
