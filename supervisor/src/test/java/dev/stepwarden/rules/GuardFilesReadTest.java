package dev.stepwarden.rules;

import static org.assertj.core.api.Assertions.assertThat;

import dev.stepwarden.metrics.ReadPlan;
import java.nio.file.Path;
import org.junit.jupiter.api.Test;

/** The read section: CSV, several sources, the line limit. */
class GuardFilesReadTest {
  private static final String HEAD = "run: { command: [sh, -c, 'true'], learning_rate: 0.1 }\n";

  @Test
  void readsAnAlsoSourceAndLetsAGuardWatchItsSeries() throws Exception {
    GuardFile g = GuardFilesTest.parse(HEAD
        + "read:\n"
        + "  from: stdout\n"
        + "  series: { train: loss }\n"
        + "  line_limit: 65536\n"
        + "  also:\n"
        + "    - { file: logs/val.csv, format: csv, series: { validation: val_loss } }\n"
        + "guards:\n"
        + "  - name: flat\n"
        + "    when: { flattens: { series: validation, over: 5 } }\n"
        + "    do: { scale: 0.5 }\n");
    ReadPlan r = g.read();
    assertThat(r.lineLimit()).isEqualTo(65536);
    assertThat(r.also()).hasSize(1);
    ReadPlan v = r.also().get(0);
    assertThat(v.source()).isEqualTo(ReadPlan.Source.FILE);
    assertThat(v.file()).isEqualTo(Path.of("logs/val.csv"));
    assertThat(v.format()).isEqualTo(ReadPlan.Format.CSV);
    assertThat(v.lineLimit()).isEqualTo(65536);
    assertThat(r.allSeries()).containsOnlyKeys("train", "validation");
  }

  @Test
  void theDefaultSeriesLeaveOutWhatAnAlsoSourceCarries() throws Exception {
    GuardFile g = GuardFilesTest.parse(HEAD + "read:\n  also: [ { file: v.csv, format: csv,"
        + " series: { validation: val_loss } } ]\n");
    assertThat(g.read().series()).containsOnlyKeys("train");
  }

  @Test
  void refusesASeriesFromTwoSourcesWithThePlace() {
    ConfigException e = GuardFilesTest.refusal(HEAD + "read:\n  series: { train: loss }\n"
        + "  also:\n    - { from: stderr, format: pairs, series: { train: loss } }\n");
    assertThat(e.getMessage()).contains("series 'train' is read from two sources").contains(":5:"); // the list item
  }

  @Test
  void refusesAnAlsoSourceWithoutSeriesOrWithAnUnknownKey() {
    assertThat(GuardFilesTest.refusal(HEAD + "read:\n  also: [ { file: v.csv } ]\n")
        .getMessage()).contains("read.also[1] needs 'series'");
    assertThat(GuardFilesTest.refusal(HEAD + "read:\n  also: [ { fiel: v.csv, series: { v: x } } ]\n")
        .getMessage()).contains("unknown key 'fiel' in read.also[1]");
    assertThat(GuardFilesTest.refusal(HEAD + "read:\n  also: v.csv\n").getMessage())
        .contains("read.also must be a list of sources");
  }

  @Test
  void keepsTheSingleSourceFormValid() throws Exception {
    GuardFile g = GuardFilesTest.parse(GuardFilesTest.SKETCH);
    assertThat(g.read().also()).isEmpty();
    assertThat(g.read().lineLimit()).isEqualTo(ReadPlan.DEFAULT_LINE_LIMIT);
  }

  @Test
  void aPatternWithPythonGroupsNamedByTheTrainersKeysLoadsAndFeedsItsSeries() throws Exception {
    GuardFile g = GuardFilesTest.parse(HEAD + "read:\n  format: pattern\n"
        + "  pattern: 'step (?P<step>\\d+) loss (?P<loss>\\S+)( val_loss (?P<val_loss>\\S+))?'\n"
        + "  series: { train: loss, validation: val_loss }\n");
    dev.stepwarden.metrics.MetricsIntake in = new dev.stepwarden.metrics.MetricsIntake(g.read());
    assertThat(in.accept("step 40 loss 0.7 val_loss 0.9", 0).sample().values())
        .containsEntry("train", 0.7).containsEntry("validation", 0.9);
    assertThat(GuardFilesTest.refusal(HEAD + "read:\n  format: pattern\n"
        + "  pattern: 'loss (?P<loss>\\S+) (?P<valloss>\\S+)'\n"
        + "  series: { train: loss, validation: val_loss }\n").getMessage())
        .contains("no named group (?P<val_loss>...) for series 'validation'")
        .contains("did you mean 'valloss'?");
  }
}
