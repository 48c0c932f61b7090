package dev.stepwarden.metrics;

import static org.assertj.core.api.Assertions.assertThat;
import static org.assertj.core.api.Assertions.entry;

import java.util.List;
import java.util.Map;
import net.jqwik.api.Arbitraries;
import net.jqwik.api.Arbitrary;
import net.jqwik.api.Combinators;
import net.jqwik.api.ForAll;
import net.jqwik.api.Property;
import net.jqwik.api.Provide;
import org.junit.jupiter.api.Test;

class JsonLineParserTest {
  private final JsonLineParser p = new JsonLineParser();

  /** RFC 8259, section 13, first example (an object whose Image member nests Thumbnail). */
  static final String RFC8259_OBJECT = String.join("\n",
      "{",
      "  \"Image\": {",
      "      \"Width\":  800,",
      "      \"Height\": 600,",
      "      \"Title\":  \"View from 15th Floor\",",
      "      \"Thumbnail\": {",
      "          \"Url\":    \"http://www.example.com/image/481989943\",",
      "          \"Height\": 125,",
      "          \"Width\":  100",
      "      },",
      "      \"Animated\" : false,",
      "      \"IDs\": [116, 943, 234, 38793]",
      "    }",
      "}");

  /** RFC 8259, section 13, second example (an array containing two objects). */
  static final String RFC8259_ARRAY = String.join("\n",
      "[",
      "  {",
      "     \"precision\": \"zip\",",
      "     \"Latitude\":  37.7668,",
      "     \"Longitude\": -122.3959,",
      "     \"Address\":   \"\",",
      "     \"City\":      \"SAN FRANCISCO\",",
      "     \"State\":     \"CA\",",
      "     \"Zip\":       \"94107\",",
      "     \"Country\":   \"US\"",
      "  },",
      "  {",
      "     \"precision\": \"zip\",",
      "     \"Latitude\":  37.371991,",
      "     \"Longitude\": -122.026020,",
      "     \"Address\":   \"\",",
      "     \"City\":      \"SUNNYVALE\",",
      "     \"State\":     \"CA\",",
      "     \"Zip\":       \"94085\",",
      "     \"Country\":   \"US\"",
      "  }",
      "]");

  @Test
  void readsTheNumbersOfTheRfc8259ObjectExampleByDottedKeys() {
    // RFC 8259, section 13: Image.Width 800, Image.Height 600, Thumbnail Height 125, Width 100;
    // the IDs array, the strings and the boolean carry no metric
    assertThat(Fieldset.parse(p, RFC8259_OBJECT)).containsExactly(
        entry("Image.Width", 800.0), entry("Image.Height", 600.0),
        entry("Image.Thumbnail.Height", 125.0), entry("Image.Thumbnail.Width", 100.0));
  }

  @Test
  void passesOverTheRfc8259ArrayExampleAndReadsEachOfItsObjectsAsALine() {
    // RFC 8259, section 13: a JSON text that is an array is not a metrics line
    assertThat(p.parse(RFC8259_ARRAY, (k, v) -> { })).isFalse();
    String first = RFC8259_ARRAY.substring(RFC8259_ARRAY.indexOf('{'),
        RFC8259_ARRAY.indexOf('}') + 1);
    assertThat(Fieldset.parse(p, first)).containsExactly(entry("Latitude", 37.7668),
        entry("Longitude", -122.3959));
    String second = RFC8259_ARRAY.substring(RFC8259_ARRAY.lastIndexOf('{'),
        RFC8259_ARRAY.lastIndexOf('}') + 1);
    assertThat(Fieldset.parse(p, second)).containsExactly(entry("Latitude", 37.371991),
        entry("Longitude", -122.026020));
  }

  @Test
  void passesOverTheRfc8259ValueOnlyTexts() {
    // RFC 8259, section 13: "Hello world!", 42 and true are JSON texts, but not objects
    for (String t : List.of("\"Hello world!\"", "42", "true")) {
      assertThat(p.parse(t, (k, v) -> { })).as(t).isFalse();
    }
  }

  @Test
  void readsNonFiniteSpellingsBareAndInStrings() {
    Map<String, Double> f = Fieldset.parse(p, "{\"a\": NaN, \"b\": Infinity, \"c\": -Infinity,"
        + " \"d\": \"nan\", \"e\": \"-inf\", \"f\": \"Infinity\", \"g\": \"inf\", \"h\": \"NaN\","
        + " \"i\": \"hello\", \"j\": \"0.5\"}");
    assertThat(f.get("a")).isNaN();
    assertThat(f.get("b")).isEqualTo(Double.POSITIVE_INFINITY);
    assertThat(f.get("c")).isEqualTo(Double.NEGATIVE_INFINITY);
    assertThat(f.get("d")).isNaN();
    assertThat(f.get("e")).isEqualTo(Double.NEGATIVE_INFINITY);
    assertThat(f.get("f")).isEqualTo(Double.POSITIVE_INFINITY);
    assertThat(f.get("g")).isEqualTo(Double.POSITIVE_INFINITY);
    assertThat(f.get("h")).isNaN();
    assertThat(f).doesNotContainKeys("i", "j"); // only non-finite spellings are read from text
  }

  @Test
  void readsARealisticCorpusOfTrainerLines() {
    // invented lines in the style of our own demo trainer and common loggers
    assertThat(Fieldset.parse(p, "{\"step\": 1200, \"loss\": 0.4187, \"lr\": 0.001}"))
        .containsExactly(entry("step", 1200.0), entry("loss", 0.4187), entry("lr", 0.001));
    assertThat(Fieldset.parse(p, "{\"step\":7,\"val\":{\"loss\":1.25,\"acc\":0.5},\"tag\":null}"))
        .containsExactly(entry("step", 7.0), entry("val.loss", 1.25), entry("val.acc", 0.5));
    assertThat(Fieldset.parse(p, "  {\"ep\\u006fch\": 3, \"k\\\"q\": 2}  "))
        .containsExactly(entry("epoch", 3.0), entry("k\"q", 2.0));
    assertThat(Fieldset.parse(p, "{\"loss\": 2.5E-3, \"grad_norm\": +4, \"x\": []}"))
        .containsExactly(entry("loss", 0.0025), entry("grad_norm", 4.0));
    assertThat(Fieldset.parse(p, "{}")).isEmpty();
  }

  @Test
  void passesOverLinesThatAreNotJsonObjects() {
    for (String line : List.of("", "   ", "Epoch 1/10 ━━━━━━ 42%", "Traceback (most recent call"
        + " last):", "WARNING: something", "[1, 2, 3]", "\u0000\u00ff\ufffd{{{")) {
      assertThat(p.parse(line, (k, v) -> { })).as(line).isFalse();
    }
  }

  @Test
  void aLineCutMidNumberDoesNotYieldAShortenedNumber() {
    assertThat(Fieldset.parse(p, "{\"step\": 5, \"loss\": 0.3")).containsExactly(
        entry("step", 5.0));
    assertThat(Fieldset.parse(p, "{\"step\": 5, \"loss\": 0.31, \"note\": \"abc"))
        .containsExactly(entry("step", 5.0), entry("loss", 0.31));
  }

  @Provide
  Arbitrary<String> objects() {
    Arbitrary<String> key = Arbitraries.strings().withCharRange('a', 'z').ofMinLength(1)
        .ofMaxLength(6);
    Arbitrary<String> num = Arbitraries.doubles().between(-1e6, 1e6).map(Object::toString);
    Arbitrary<String> member = Combinators.combine(key, Arbitraries.oneOf(num,
        Arbitraries.of("true", "false", "null", "\"txt\"", "[1,{\"z\":2}]", "{\"in\": 1.5}",
            "\"nan\"")))
        .as((k, v) -> k + "\": " + v);
    // keys made unique by their position, so a cut line's first value is the full line's too
    return member.list().ofMaxSize(6).map(ms -> {
      StringBuilder b = new StringBuilder("{");
      for (int i = 0; i < ms.size(); i++) {
        b.append(i == 0 ? "" : ", ").append('"').append(i).append(ms.get(i));
      }
      return b.append('}').toString();
    });
  }

  @Property(tries = 1000)
  void agreesWithTheJacksonReaderOnValidObjects(@ForAll("objects") String line) {
    // jackson-core 3.1 streaming parser as the reference reader
    Map<String, Double> ours = Fieldset.parse(p, line);
    Map<String, Double> ref = Fieldset.parse(new JacksonJsonLineParser(), line);
    assertThat(ours).isEqualTo(ref);
  }

  @Property(tries = 2000)
  void malformedAndCutLinesNeverThrowAndNeverInventValues(@ForAll("objects") String line,
      @ForAll("cuts") double cut, @ForAll("noise") String noise) {
    Map<String, Double> full = Fieldset.parse(p, line);
    int at = (int) (cut * line.length());
    String broken = line.substring(0, at) + noise;
    Map<String, Double> part = Fieldset.parse(p, broken);
    // whatever a broken line yields is a key of the full line with the same value, unless the
    // noise itself completed a value (then it is a valid number read from the noise)
    part.forEach((k, v) -> {
      if (full.containsKey(k) && noise.isEmpty()) {
        assertThat(v).isEqualTo(full.get(k));
      }
    });
  }

  @Provide
  Arbitrary<Double> cuts() {
    return Arbitraries.doubles().between(0, 1);
  }

  @Provide
  Arbitrary<String> noise() {
    return Arbitraries.oneOf(Arbitraries.just(""), Arbitraries.strings().ofMaxLength(8),
        Arbitraries.strings().withChars("{}[]\":,\\ 0123eE.-+nNaI").ofMaxLength(12));
  }

  @Test
  void deepNestingStopsWithoutStackOverflow() {
    String deep = "{\"a\":".repeat(100_000) + "1" + "}".repeat(100_000);
    assertThat(p.parse(deep, (k, v) -> { })).isFalse();
    String deepArray = "{\"a\":" + "[".repeat(100_000) + "]".repeat(100_000) + ", \"b\": 2}";
    assertThat(Fieldset.parse(p, deepArray)).isEmpty();
  }
}
