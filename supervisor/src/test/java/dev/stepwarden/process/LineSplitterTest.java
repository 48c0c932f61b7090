package dev.stepwarden.process;

import static org.assertj.core.api.Assertions.assertThat;

import java.io.ByteArrayOutputStream;
import java.nio.charset.StandardCharsets;
import java.util.ArrayList;
import java.util.Arrays;
import java.util.HexFormat;
import java.util.List;
import net.jqwik.api.Arbitraries;
import net.jqwik.api.Arbitrary;
import net.jqwik.api.ForAll;
import net.jqwik.api.Property;
import net.jqwik.api.Provide;
import net.jqwik.api.Tuple;
import net.jqwik.api.constraints.IntRange;
import net.jqwik.api.constraints.Size;
import org.junit.jupiter.api.Test;

/** Line rules in isolation, including every way a read can split a line. */
class LineSplitterTest {

  /** Splits {@code input} fed in pieces of the given sizes (cycled); "hex|cut" per line. */
  private static List<String> split(byte[] input, int max, List<Integer> pieces) {
    LineSplitter s = new LineSplitter(max);
    List<String> out = new ArrayList<>();
    LineSplitter.Sink sink = (b, off, len, cut) ->
        out.add(HexFormat.of().formatHex(b, off, off + len) + "|" + cut);
    int pos = 0;
    int k = 0;
    while (pos < input.length) {
      int n = pieces.isEmpty() ? input.length : Math.min(pieces.get(k++ % pieces.size()),
          input.length - pos);
      // Feed from a copy with junk around it: the splitter must honour off/len.
      byte[] padded = new byte[n + 6];
      Arrays.fill(padded, (byte) '\n');
      System.arraycopy(input, pos, padded, 3, n);
      s.feed(padded, 3, n, sink);
      pos += n;
    }
    s.finish(sink);
    return out;
  }

  private static List<String> lines(String input, int max, List<Integer> pieces) {
    List<String> out = new ArrayList<>();
    for (String r : split(input.getBytes(StandardCharsets.UTF_8), max, pieces)) {
      String hex = r.substring(0, r.indexOf('|'));
      out.add(new String(HexFormat.of().parseHex(hex), StandardCharsets.UTF_8)
          + (r.endsWith("true") ? "<cut>" : ""));
    }
    return out;
  }

  @Test
  void crlfAndRedrawsAcrossEveryReadBoundary() {
    String input = "a\r\nbb\r\n10%\r20%\rdone\n\r\nlast\r";
    List<String> expected = List.of("a", "bb", "done", "", "last");
    for (int piece = 1; piece <= input.length(); piece++) {
      assertThat(lines(input, 100, List.of(piece))).as("pieces of %d", piece)
          .containsExactlyElementsOf(expected);
    }
  }

  @Test
  void aLastLineWithoutNewlineIsDeliveredAndATrailingNewlineAddsNoEmptyLine() {
    assertThat(lines("one\ntwo", 100, List.of())).containsExactly("one", "two");
    assertThat(lines("one\ntwo\n", 100, List.of())).containsExactly("one", "two");
    assertThat(lines("", 100, List.of())).isEmpty();
    assertThat(lines("\n\n", 100, List.of())).containsExactly("", "");
  }

  @Test
  void anEndlessRedrawNeverCountsAsOversized() {
    StringBuilder bar = new StringBuilder();
    for (int i = 0; i <= 1000; i++) {
      bar.append('\r').append(i / 10).append('%');
    }
    bar.append('\n');
    assertThat(lines(bar.toString(), 16, List.of(7))).containsExactly("100%");
  }

  @Test
  void aCutNeverSplitsAUtf8Character() {
    // 'é' is C3 A9, '€' is E2 82 AC, U+1F600 is F0 9F 98 80 (Unicode Standard 15.0, s3.9,
    // Table 3-6 "UTF-8 Bit Distribution"; table number recalled from memory).
    assertThat(lines("\u00e9\u00e9\u00e9\u00e9\n", 5, List.of())).containsExactly("\u00e9\u00e9<cut>");
    assertThat(lines("a\u20ac\u20ac\n", 6, List.of(1))).containsExactly("a\u20ac<cut>");
    assertThat(lines("\ud83d\ude00\ud83d\ude00\n", 7, List.of())).containsExactly("\ud83d\ude00<cut>");
    assertThat(lines("ab\u20ac\n", 5, List.of())).containsExactly("ab\u20ac");
  }

  @Test
  void utf8SafeLengthDropsOnlyAnIncompleteTrailingSequence() {
    byte[] euro = "x\u20ac".getBytes(StandardCharsets.UTF_8); // 78 E2 82 AC
    assertThat(LineSplitter.utf8SafeLength(euro, 0, 4)).isEqualTo(4);
    assertThat(LineSplitter.utf8SafeLength(euro, 0, 3)).isEqualTo(1);
    assertThat(LineSplitter.utf8SafeLength(euro, 0, 2)).isEqualTo(1);
    assertThat(LineSplitter.utf8SafeLength(euro, 0, 1)).isEqualTo(1);
    byte[] junk = {(byte) 0xFF, (byte) 0x80};
    assertThat(LineSplitter.utf8SafeLength(junk, 0, 2)).as("malformed stays as it is").isEqualTo(2);
  }

  @Test
  void countsLinesAndCutOnes() {
    LineSplitter s = new LineSplitter(3);
    byte[] b = "ab\nabcd\nabc\nabcdef".getBytes(StandardCharsets.US_ASCII);
    s.feed(b, 0, b.length, (buf, off, len, cut) -> { });
    s.finish((buf, off, len, cut) -> { });
    assertThat(s.lines()).isEqualTo(4);
    assertThat(s.oversized()).isEqualTo(2);
  }

  // ---- property: any chunking gives what a whole-input reference model gives ----

  private static final byte[][] TOKENS = {
      {'a'}, {'b'}, {(byte) 0xC3, (byte) 0xA9}, {'\r'}, {'\n'}, {'\r', '\n'}, {(byte) 0xFF}
  };

  @Provide
  Arbitrary<byte[]> streams() {
    return Arbitraries.of(TOKENS).list().ofMaxSize(60).map(ts -> {
      ByteArrayOutputStream b = new ByteArrayOutputStream();
      ts.forEach(b::writeBytes);
      return b.toByteArray();
    });
  }

  @Property(tries = 1000)
  void theEightByteScanFindsTheSameBreakAsAByteLoop(@ForAll("breakBytes") byte[] b,
      @ForAll @IntRange(max = 40) int from) {
    int start = Math.min(from, b.length);
    int expected = b.length;
    for (int k = start; k < b.length; k++) {
      if (b[k] == '\n' || b[k] == '\r') {
        expected = k;
        break;
      }
    }
    assertThat(LineSplitter.nextBreak(b, start, b.length)).isEqualTo(expected);
  }

  /** Long runs without a break, of bytes next to the breaks in value, and some breaks. */
  @Provide
  Arbitrary<byte[]> breakBytes() {
    return Arbitraries.frequency(Tuple.of(1, (byte) '\n'), Tuple.of(1, (byte) '\r'),
        Tuple.of(6, (byte) 0x09), Tuple.of(6, (byte) 0x0B), Tuple.of(6, (byte) 0x0C),
        Tuple.of(6, (byte) 0x0E), Tuple.of(6, (byte) 0x8A), Tuple.of(6, (byte) 0x8D),
        Tuple.of(6, (byte) 0xFF), Tuple.of(6, (byte) 0x00), Tuple.of(20, (byte) 'a'))
        .array(byte[].class).ofMaxSize(70);
  }

  @Property(tries = 400)
  void chunkingNeverChangesTheLines(@ForAll("streams") byte[] input,
      @ForAll @IntRange(min = 1, max = 9) int max,
      @ForAll @Size(max = 6) List<@IntRange(min = 1, max = 8) Integer> pieces) {
    assertThat(split(input, max, pieces)).containsExactlyElementsOf(model(input, max));
  }

  /**
   * The rules stated plainly over the whole input: split on LF; a final piece counts only when
   * non-empty; strip one trailing CR; keep what follows the last CR; cut to {@code max} bytes and,
   * for this alphabet, drop a dangling lead byte C3.
   */
  private static List<String> model(byte[] input, int max) {
    List<String> out = new ArrayList<>();
    int start = 0;
    for (int i = 0; i <= input.length; i++) {
      boolean end = i == input.length;
      if (!end && input[i] != '\n') {
        continue;
      }
      if (end && i == start) {
        break;
      }
      byte[] piece = Arrays.copyOfRange(input, start, i);
      int len = piece.length;
      if (len > 0 && piece[len - 1] == '\r') {
        len--;
      }
      int from = 0;
      for (int j = 0; j < len; j++) {
        if (piece[j] == '\r') {
          from = j + 1;
        }
      }
      int segLen = len - from;
      boolean cut = segLen > max;
      int keep = cut ? max : segLen;
      if (cut && piece[from + keep - 1] == (byte) 0xC3) {
        keep--;
      }
      out.add(HexFormat.of().formatHex(piece, from, from + keep) + "|" + cut);
      start = i + 1;
    }
    return out;
  }
}
