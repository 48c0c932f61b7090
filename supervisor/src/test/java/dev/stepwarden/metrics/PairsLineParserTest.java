package dev.stepwarden.metrics;

import static org.assertj.core.api.Assertions.assertThat;
import static org.junit.jupiter.api.Assertions.assertTimeoutPreemptively;

import java.time.Duration;
import java.util.ArrayList;
import java.util.List;
import java.util.regex.Matcher;
import java.util.regex.Pattern;
import net.jqwik.api.ForAll;
import net.jqwik.api.Property;
import net.jqwik.api.constraints.StringLength;
import net.jqwik.api.constraints.Chars;
import org.junit.jupiter.api.Test;

/** The single-pass pairs parser reads what the regular expression it replaced read. */
class PairsLineParserTest {
  /**
   * The former implementation, kept as the reference (it is quadratic on long runs), with the
   * one rule added since: a value followed by a comma and a digit (1,234.5) is not taken.
   */
  static final Pattern REFERENCE =
      Pattern.compile("([A-Za-z_][A-Za-z0-9_./-]*)\\s*[=:]\\s*([^\\s,|;]+)");

  static List<String> parsed(String line) {
    List<String> out = new ArrayList<>();
    new PairsLineParser().parse(line, (k, v) -> out.add(k + "=" + v));
    return out;
  }

  static List<String> reference(String line) {
    List<String> out = new ArrayList<>();
    Matcher m = REFERENCE.matcher(line);
    while (m.find()) {
      double v = Decimals.parse(line, m.start(2), m.end(2));
      int after = m.end(2);
      boolean ambiguous = after + 1 < line.length() && line.charAt(after) == ','
          && Character.isDigit(line.charAt(after + 1));
      if (!Decimals.failed(v) && !ambiguous) {
        out.add(m.group(1) + "=" + v);
      }
    }
    return out;
  }

  @Property(tries = 2000)
  void agreesWithTheReferencePatternOnArbitraryLines(
      @ForAll @StringLength(max = 60) @Chars({'a', 'Z', '_', '9', '0', '.', '/', '-', '=', ':',
          ' ', '\t', ',', '|', ';', 'e', '+', 'x'}) String line) {
    assertThat(parsed(line)).isEqualTo(reference(line));
  }

  @Test
  void readsTheCommonShapes() {
    assertThat(parsed("step=10 loss=0.31 lr=1e-3")).containsExactly("step=10.0", "loss=0.31",
        "lr=0.001");
    assertThat(parsed("epoch: 3 | val/loss: 0.25, acc=nan")).containsExactly("epoch=3.0",
        "val/loss=0.25", "acc=NaN");
    assertThat(parsed("9abc=1")).containsExactly("abc=1.0");
    assertThat(parsed("loss=1,234.5 lr=0.1")).containsExactly("lr=0.1");
    assertThat(parsed("a=1,b=2")).containsExactly("a=1.0", "b=2.0");
  }

  @Test
  void aMegabyteLineWithoutSeparatorsIsReadInOnePass() {
    // The reference pattern backtracks quadratically here (minutes on a 1 MiB line).
    String line = "x".repeat(1 << 20);
    assertTimeoutPreemptively(Duration.ofSeconds(20), () -> assertThat(parsed(line)).isEmpty());
    String nines = "loss=" + "9".repeat(1 << 20);
    assertTimeoutPreemptively(Duration.ofSeconds(20), () -> assertThat(parsed(nines)).hasSize(1));
  }
}
