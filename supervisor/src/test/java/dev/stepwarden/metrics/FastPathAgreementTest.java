package dev.stepwarden.metrics;

import static org.assertj.core.api.Assertions.assertThat;

import java.nio.charset.StandardCharsets;
import java.util.ArrayList;
import java.util.HashMap;
import java.util.LinkedHashMap;
import java.util.List;
import java.util.Map;
import java.util.Random;
import net.jqwik.api.Arbitraries;
import net.jqwik.api.Arbitrary;
import net.jqwik.api.Combinators;
import net.jqwik.api.ForAll;
import net.jqwik.api.Property;
import net.jqwik.api.Provide;
import org.junit.jupiter.api.Test;

/**
 * The fast JSON path (key ids, one-scan numbers, unwanted values left unconverted) reads exactly
 * what the parser read before it ({@link ReferenceJsonLineParser}): the same fields in the same
 * order, the same value bits, the same printed text; and an intake on it gives the same samples,
 * counts and "keys seen" as an intake on the reference.
 */
class FastPathAgreementTest {
  /** One put as a comparable string: key, value bits, printed text or '-'. */
  private static final class Recorder implements LineParser.Fields {
    final List<String> puts = new ArrayList<>();
    final Map<Integer, String> keyOfId = new HashMap<>();

    @Override
    public void put(String key, double value) {
      puts.add(key + "=" + Long.toHexString(Double.doubleToRawLongBits(value)) + " -");
    }

    @Override
    public void put(String key, double value, byte[] text, int from, int to) {
      puts.add(key + "=" + Long.toHexString(Double.doubleToRawLongBits(value)) + " "
          + new String(text, from, to - from, StandardCharsets.UTF_8));
    }

    @Override
    public void put(int id, String key, double value, byte[] text, int from, int to) {
      assertThat(id).isBetween(0, KeyCache.MAX_ENTRIES - 1);
      String before = keyOfId.putIfAbsent(id, key);
      assertThat(before == null || before.equals(key)).as("id %d names one key", id).isTrue();
      LineParser.Fields.super.put(id, key, value, text, from, to);
    }
  }

  private static List<String> puts(LineParser p, String line, boolean asBytes) {
    Recorder r = new Recorder();
    if (asBytes) {
      byte[] b = ("\t" + line).getBytes(StandardCharsets.UTF_8);
      p.parse(b, 1, b.length - 1, r);
    } else {
      p.parse(line, r);
    }
    return r.puts;
  }

  @Provide
  Arbitrary<String> numbers() {
    Arbitrary<String> fixed = Arbitraries.of("0", "-0", "0.0", "-0.0", "1", "12", "0123", "1.",
        ".5", "+1", "-", "--1", "1e", "1e+", "1E+2", "6.02e23", "1e400", "-1e400", "1e-400",
        "4.9e-324", "2.2250738585072014E-308", "1.7976931348623157e308", "NaN", "-NaN",
        "Infinity", "-Infinity", "+Infinity", "nan", "inf", "INF", "1.5.2", "2x", "0x10", "1e5x",
        "123456789012345678901234567890", "0.000000000000000000001234567890123456789",
        "9007199254740993", "0.30000000000000004", "1e22", "1e23", "00", "-01", "1e0001");
    Arbitrary<String> doubles = Arbitraries.longs().map(Double::longBitsToDouble)
        .filter(Double::isFinite).map(Object::toString);
    Arbitrary<String> repr = Arbitraries.doubles().between(-10, 10).ofScale(17)
        .map(d -> NumberExactnessTest.pythonRepr(d));
    Arbitrary<String> ints = Arbitraries.longs().map(Object::toString);
    return Arbitraries.oneOf(fixed, doubles, repr, ints);
  }

  @Provide
  Arbitrary<String> lines() {
    Arbitrary<String> key = Arbitraries.oneOf(
        Arbitraries.of("step", "loss", "lr", "epoch", "val", "a\\u00e9", "r\u00e9sum\u00e9",
            "\\ud83d\\ude00", "q\\\"t", "", "\\ud800"),
        Arbitraries.strings().withCharRange('a', 'e').ofMinLength(1).ofMaxLength(3),
        Arbitraries.strings().withCharRange('a', 'z').ofMinLength(120).ofMaxLength(140));
    Arbitrary<String> value = Arbitraries.oneOf(numbers(), numbers(), numbers(),
        Arbitraries.of("true", "false", "null", "\"txt\"", "\"nan\"", "\"-Infinity\"",
            "\"in\\\"f\"", "[1, {\"z\": 2}]", "{\"loss\": 1.5, \"x\": {\"y\": -2e-3}}", "{}",
            "{\"a\": NaN}"));
    Arbitrary<String> member = Combinators.combine(key, value, Arbitraries.of("", " ", "\t"))
        .as((k, v, ws) -> "\"" + k + "\"" + ws + ":" + ws + v);
    Arbitrary<String> object = member.list().ofMaxSize(7)
        .map(ms -> "{" + String.join(", ", ms) + "}");
    Arbitrary<String> noise = Arbitraries.strings().withChars("{}[]\":,\\ 0123eE.-+nNaI")
        .ofMaxLength(10);
    return Combinators.combine(object, Arbitraries.doubles().between(0, 1.2), noise)
        .as((o, cut, n) -> cut >= 1 ? o : o.substring(0, (int) (cut * o.length())) + n);
  }

  @Property(tries = 3000)
  void putsTheSameFieldsValueBitsAndPrintedTextAsTheReferenceParser(
      @ForAll("lines") String line) {
    assertThat(puts(new JsonLineParser(), line, false)).as(line)
        .isEqualTo(puts(new ReferenceJsonLineParser(), line, false));
    assertThat(puts(new JsonLineParser(), line, true)).as(line)
        .isEqualTo(puts(new ReferenceJsonLineParser(), line, true));
  }

  @Provide
  Arbitrary<List<String>> runs() {
    // lines of one run: mostly one shape, with keys that start alike, move, change or come
    // escaped, so the ids expected at each position are confirmed, missed and relearned
    Arbitrary<String> key = Arbitraries.of("step", "loss", "los", "loss2", "lr", "lo\\u0073s",
        "l\\u00e9", "st", "steps", "a\\\"b", "a", "epoch_long_key_name", "");
    Arbitrary<String> value = Arbitraries.of("1", "0.25", "-3e-2", "NaN", "\"inf\"", "{\"x\": 1}",
        "true", "[1]", "7x", "0.5012345678901234");
    Arbitrary<String> member = Combinators.combine(key, value).as((k, v) -> "\"" + k + "\": " + v);
    Arbitrary<String> line = Arbitraries.oneOf(
        Arbitraries.just("{\"step\": 1, \"loss\": 0.5, \"lr\": 0.001}"),
        member.list().ofMaxSize(5).map(ms -> "{" + String.join(", ", ms) + "}"),
        Arbitraries.of("{\"step\": 2, \"loss", "{\"step\": 2, \"los", "{\"step\"",
            "{\"step\": 3, \"loss\": 0.5", "{\"st"));
    return line.list().ofMinSize(1).ofMaxSize(12);
  }

  @Property(tries = 1500)
  void oneParserOverManyLinesPutsWhatTheReferenceParserPuts(@ForAll("runs") List<String> run) {
    JsonLineParser fast = new JsonLineParser();
    ReferenceJsonLineParser ref = new ReferenceJsonLineParser();
    Recorder r = new Recorder();
    for (String line : run) {
      for (boolean asBytes : new boolean[] {false, true}) {
        r.puts.clear();
        if (asBytes) {
          byte[] b = line.getBytes(StandardCharsets.UTF_8);
          fast.parse(b, 0, b.length, r); // no slack after the line: cut keys stay cut
        } else {
          fast.parse(line, r);
        }
        assertThat(r.puts).as(line).isEqualTo(puts(ref, line, false));
      }
    }
  }

  @Test
  void eightDigitsAtOnceMatchDigitByDigitAndAnyOtherByteIsRefused() {
    Random rnd = new Random(3);
    byte[] near = {'0', '9', '/', ':', ' ', '.', 'e', '-', 0, (byte) 0xFA, (byte) 0xC3, 0x7F};
    for (int t = 0; t < 200_000; t++) {
      byte[] b = new byte[8];
      boolean digits = true;
      long value = 0;
      for (int k = 0; k < 8; k++) {
        b[k] = rnd.nextInt(4) > 0 ? (byte) ('0' + rnd.nextInt(10)) : near[rnd.nextInt(near.length)];
        digits &= b[k] >= '0' && b[k] <= '9';
        value = value * 10 + (b[k] - '0');
      }
      long w = Decimals.eightBytes(b, 0);
      assertThat(Decimals.eightDigits(w)).as(new String(b, StandardCharsets.ISO_8859_1))
          .isEqualTo(digits);
      if (digits) {
        assertThat(Decimals.eightDigitValue(w)).isEqualTo(value);
      }
    }
  }

  @Test
  void keysBeyondTheCacheCapacityReadTheSameAndKeepTheirIds() {
    JsonLineParser fast = new JsonLineParser();
    ReferenceJsonLineParser ref = new ReferenceJsonLineParser();
    Recorder r = new Recorder(); // one recorder: ids must stay consistent across lines
    for (int i = 0; i < 3 * KeyCache.MAX_ENTRIES; i++) {
      String line = "{\"k" + i + "\": " + i + ".5, \"loss\": 0.25, \"n\": {\"k" + i + "\": 1}}";
      r.puts.clear();
      fast.parse(line, r);
      assertThat(r.puts).as(line).isEqualTo(puts(ref, line, false));
    }
    assertThat(r.keyOfId).hasSize(KeyCache.MAX_ENTRIES);
  }

  @Test
  void aReceiverThatWantsNoValueStillGetsMalformedNumbersStoppingTheLine() {
    JsonLineParser p = new JsonLineParser();
    List<String> got = new ArrayList<>();
    LineParser.Fields onlyLoss = new LineParser.Fields() {
      @Override
      public void put(String key, double value) {
        got.add(key);
      }

      @Override
      public boolean wants(int id) {
        return false; // nothing by id: only keys without one would arrive
      }
    };
    assertThat(p.parse("{\"epoch\": 3, \"lr\": 0.001}", onlyLoss)).as("still a metric line")
        .isTrue();
    assertThat(got).isEmpty();
    assertThat(p.parse("{\"epoch\": 3x, \"" + "k".repeat(200) + "\": 1}", onlyLoss)).isFalse();
    assertThat(p.parse("{\"epoch\": 3, \"" + "k".repeat(200) + "\": 1}", onlyLoss)).isTrue();
    assertThat(got).containsExactly("k".repeat(200)); // too long for an id: handed on by name
  }

  private static ReadPlan plan() {
    Map<String, String> series = new LinkedHashMap<>();
    series.put("train", "loss");
    series.put("validation", "val.loss");
    series.put("never", "absent");
    series.put("both", "step");
    return new ReadPlan(ReadPlan.Source.STDOUT, null, ReadPlan.Format.JSON, null, "step", "epoch",
        "lr", series);
  }

  @Test
  void anIntakeOnTheFastPathAgreesWithOneOnTheReferenceOverManyLinesAndKeys() {
    MetricsIntake fast = new MetricsIntake(plan(), null, new JsonLineParser());
    MetricsIntake ref = new MetricsIntake(plan(), null, new ReferenceJsonLineParser());
    Random rnd = new Random(7);
    String[] extra = {"junk", "acc", "grad_norm", "epoch"};
    // past the keys-seen window (10,000 lines) with unwanted keys, new keys beyond the cache
    // and beyond the keys-seen limit, malformed numbers of unwanted keys, and text lines
    for (int i = 0; i < 12_500; i++) {
      StringBuilder b = new StringBuilder("{");
      b.append("\"").append(extra[rnd.nextInt(extra.length)]).append("\": ")
          .append(rnd.nextInt(10) == 0 ? "1x" : Double.toString(rnd.nextGaussian()));
      if (i % 7 == 0) {
        b.append(", \"fresh").append(i).append("\": ").append(i);
      }
      if (rnd.nextInt(3) > 0) {
        b.append(", \"loss\": ").append(NumberExactnessTest.pythonRepr(rnd.nextDouble()));
      }
      if (rnd.nextInt(5) == 0) {
        b.append(", \"val\": {\"loss\": ").append(rnd.nextInt(4) == 0 ? "\"nan\"" : "0.5")
            .append("}");
      }
      if (rnd.nextInt(4) > 0) {
        b.append(", \"step\": ").append(i);
      }
      if (rnd.nextInt(9) == 0) {
        b.append(", \"lr\": 1e-3, \"applied_revision\": ").append(i / 100);
      }
      String line = i % 97 == 0 ? "epoch 3: loss 0.5" : b.append("}").toString();
      byte[] bytes = line.getBytes(StandardCharsets.UTF_8);
      MetricsIntake.Reading a = fast.accept(bytes, 0, bytes.length, i, false);
      MetricsIntake.Reading e = ref.accept(bytes, 0, bytes.length, i, false);
      assertThat(a).as(line).isEqualTo(e);
      if (a != null && a.sample() != null) {
        assertThat(a.sample().values()).as(line).isEqualTo(e.sample().values());
        StringBuilder pa = new StringBuilder();
        StringBuilder pe = new StringBuilder();
        assertThat(fast.appendPrinted("train", pa)).isEqualTo(ref.appendPrinted("train", pe));
        assertThat(pa).hasToString(pe.toString());
      }
    }
    assertThat(fast.keysSeen()).isEqualTo(ref.keysSeen()).hasSize(256);
    assertThat(fast.missingSeries()).isEqualTo(ref.missingSeries()).hasSize(1);
    assertThat(fast.ignoredLines()).isEqualTo(ref.ignoredLines());
    assertThat(fast.metricLines()).isEqualTo(ref.metricLines());
    assertThat(fast.lastStep()).isEqualTo(ref.lastStep());
  }

  @Test
  void aKeyNoSeriesWantsStillCountsAsSeenWhenItFirstAppearsLate() {
    Map<String, String> series = Map.of("train", "loss");
    MetricsIntake in = new MetricsIntake(new ReadPlan(ReadPlan.Source.STDOUT, null,
        ReadPlan.Format.JSON, null, "step", null, null, series));
    for (int i = 0; i < 9_999; i++) {
      in.accept("{\"step\": " + i + ", \"loss\": 0.5, \"acc\": 1}", 0L);
    }
    in.accept("{\"late\": 2}", 0L); // line 10,000: still inside the keys-seen window
    in.accept("{\"later\": 2}", 0L); // line 10,001: past it
    assertThat(in.keysSeen()).containsExactly("acc", "late", "loss", "step");
    assertThat(in.missingSeries()).isEmpty();
    // a malformed number of a key nobody wants still ends the line before the loss
    assertThat(in.accept("{\"acc\": 1x, \"loss\": 0.25}", 0L)).isNull();
    assertThat(in.accept("{\"acc\": 1, \"loss\": 0.25}", 0L).sample().value("train"))
        .isEqualTo(0.25);
  }
}
