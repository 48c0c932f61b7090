package dev.stepwarden.metrics;

import static org.assertj.core.api.Assertions.assertThat;
import static org.assertj.core.api.Assertions.entry;

import java.util.Map;
import java.util.regex.Pattern;
import org.junit.jupiter.api.Test;

/** Realistic lines of our own for the pairs, pattern and CSV formats. */
class TextFormatsTest {
  @Test
  void pairsReadEqualsAndColonFormsWithSpaceCommaAndPipeSeparators() {
    PairsLineParser p = new PairsLineParser();
    assertThat(Fieldset.parse(p, "step=10 loss=0.31 lr=1e-3")).containsExactly(
        entry("step", 10.0), entry("loss", 0.31), entry("lr", 0.001));
    assertThat(Fieldset.parse(p, "step: 10, loss: 0.31, lr: 1e-3")).containsExactly(
        entry("step", 10.0), entry("loss", 0.31), entry("lr", 0.001));
    assertThat(Fieldset.parse(p, "epoch 3 | step 1200 | loss: 0.2875 | val_loss: 0.3012"))
        .containsExactly(entry("loss", 0.2875), entry("val_loss", 0.3012));
    assertThat(Fieldset.parse(p, "train/loss = 1.5|lr=0.1")).containsExactly(
        entry("train/loss", 1.5), entry("lr", 0.1));
  }

  @Test
  void pairsReadNonFiniteSpellingsAndPassOverText() {
    PairsLineParser p = new PairsLineParser();
    Map<String, Double> f = Fieldset.parse(p, "loss=nan grad=inf low=-inf big=Infinity x=NaN");
    assertThat(f.get("loss")).isNaN();
    assertThat(f.get("grad")).isEqualTo(Double.POSITIVE_INFINITY);
    assertThat(f.get("low")).isEqualTo(Double.NEGATIVE_INFINITY);
    assertThat(f.get("big")).isEqualTo(Double.POSITIVE_INFINITY);
    assertThat(f.get("x")).isNaN();
    assertThat(p.parse("time: 12:30:45 status=ok note: warming up", (k, v) -> { })).isFalse();
    assertThat(p.parse("100%|██████████| 500/500 [00:12<00:00, 40.1it/s]", (k, v) -> { }))
        .isFalse();
  }

  @Test
  void patternReadsNamedGroupsThatHoldNumbers() {
    PatternLineParser p = new PatternLineParser(
        Pattern.compile("it (?<step>\\d+): loss (?<loss>\\S+)"));
    assertThat(Fieldset.parse(p, "[info] it 400: loss 0.125 (best)")).containsExactly(
        entry("step", 400.0), entry("loss", 0.125));
    assertThat(Fieldset.parse(p, "it 401: loss nan").get("loss")).isNaN();
    assertThat(p.parse("no match here", (k, v) -> { })).isFalse();
  }

  @Test
  void csvNamesCellsByItsHeaderAndPassesOverEmptyCells() {
    CsvLineParser p = new CsvLineParser();
    assertThat(p.parse("step,loss,val_loss,note", (k, v) -> { })).isFalse();
    assertThat(Fieldset.parse(p, "100,0.52,,warmup")).containsExactly(entry("step", 100.0),
        entry("loss", 0.52));
    assertThat(Fieldset.parse(p, "200, 0.41 ,0.47,\"a, b\"")).containsExactly(
        entry("step", 200.0), entry("loss", 0.41), entry("val_loss", 0.47));
    assertThat(Fieldset.parse(p, "300,nan,\"0.5\"").get("loss")).isNaN();
    assertThat(Fieldset.parse(p, "300,nan,\"0.5\"")).containsEntry("val_loss", 0.5);
  }

  @Test
  void csvRereadsANewHeaderAfterTheFileStartsOver() {
    CsvLineParser p = new CsvLineParser();
    p.parse("step,loss", (k, v) -> { });
    assertThat(Fieldset.parse(p, "1,2.0")).containsExactly(entry("step", 1.0),
        entry("loss", 2.0));
    assertThat(p.parse("epoch;step;val_loss", (k, v) -> { })).isFalse();
    assertThat(Fieldset.parse(p, "1;7;0.9")).containsExactly(entry("epoch", 1.0),
        entry("step", 7.0), entry("val_loss", 0.9)); // each header sets the separator
    assertThat(p.parse(";;", (k, v) -> { })).isFalse();
    assertThat(Fieldset.parse(p, "2;8;0.8")).containsEntry("val_loss", 0.8);
  }

  @Test
  void csvSniffsTabAndSemicolonSeparatorsFromTheFirstHeader() {
    CsvLineParser tab = new CsvLineParser();
    tab.parse("step\tloss", (k, v) -> { });
    assertThat(Fieldset.parse(tab, "5\t0.25")).containsExactly(entry("step", 5.0),
        entry("loss", 0.25));
    CsvLineParser semi = new CsvLineParser();
    semi.parse("step;loss", (k, v) -> { });
    assertThat(Fieldset.parse(semi, "5;0.25")).containsExactly(entry("step", 5.0),
        entry("loss", 0.25));
  }

  @Test
  void csvRowsBeforeAnyHeaderAreNotRead() {
    CsvLineParser p = new CsvLineParser();
    assertThat(p.parse("1,2,3", (k, v) -> { })).isFalse();
  }
}
