package dev.stepwarden.metrics;

import static org.assertj.core.api.Assertions.assertThat;
import static org.assertj.core.api.Assertions.assertThatThrownBy;
import static org.assertj.core.api.Assertions.entry;

import java.util.Map;
import java.util.regex.Pattern;
import org.junit.jupiter.api.Test;

/** Python's named groups and any key name in read.pattern, and what a bad pattern says. */
class MetricPatternsTest {
  @Test
  void pythonNamedGroupsFillTheTrainersOwnKeysThroughTheIntake() throws Exception {
    Pattern p = MetricPatterns.compile(
        "epoch (?P<epoch>\\d+) step (?P<step>\\d+) loss (?P<loss>\\S+)( val_loss (?P<val_loss>\\S+))?");
    assertThat(MetricPatterns.keys(p)).containsExactly("epoch", "step", "loss", "val_loss");
    MetricsIntake in = new MetricsIntake(new ReadPlan(ReadPlan.Source.STDOUT, null,
        ReadPlan.Format.PATTERN, p, "step", "epoch", "lr",
        Map.of("train", "loss", "validation", "val_loss")));
    MetricsIntake.Reading r = in.accept("epoch 3 step 135 loss 0.41 val_loss 0.52", 0);
    assertThat(r.sample().step()).isEqualTo(135);
    assertThat(r.sample().epoch()).isEqualTo(3.0);
    assertThat(r.sample().values()).containsOnly(entry("train", 0.41), entry("validation", 0.52));
  }

  @Test
  void javaGroupsKeepTheirNamesAndOddKeysAndBackReferencesWork() throws Exception {
    Pattern p = MetricPatterns.compile("(?<q>[\"'])top-1(?P=q)=(?<top-1>[\\d.]+) (?P<acc@5>\\S+)"
        + " \\k<q>");
    assertThat(MetricPatterns.keys(p)).containsExactly("q", "top-1", "acc@5");
    assertThat(Fieldset.parse(new PatternLineParser(p), "'top-1'=0.75 0.9 '"))
        .containsExactly(entry("top-1", 0.75), entry("acc@5", 0.9));
    // a group-like text inside a character class or escaped is left alone
    Pattern q = MetricPatterns.compile("[(?P<x>]+ \\(?P<y>(?P<loss>\\d+)");
    assertThat(MetricPatterns.keys(q)).containsExactly("loss");
    // look-behind is not a group
    assertThat(MetricPatterns.keys(MetricPatterns.compile("(?<=loss )(?<loss>\\d+)")))
        .containsExactly("loss");
  }

  @Test
  void aBadPatternNamesThePositionAndTheFix() {
    assertThatThrownBy(() -> MetricPatterns.compile("loss (?P<loss>\\S+"))
        .hasMessageContaining("Unclosed group").hasMessageContaining("position")
        .hasMessageContaining("fix: close each '(' with ')'");
    assertThatThrownBy(() -> MetricPatterns.compile("loss (?P<loss>\\S+))"))
        .isInstanceOf(MetricPatterns.BadPattern.class).hasMessageContaining("extra ')'");
    assertThatThrownBy(() -> MetricPatterns.compile("*loss (?P<loss>\\S+)"))
        .hasMessageContaining("at position 1 (marked >>): >>*loss").hasMessageContaining("\\*");
    assertThatThrownBy(() -> MetricPatterns.compile("x (?P<>\\d)"))
        .hasMessageContaining("empty name").hasMessageContaining("(?P<key>...)");
    // the position points into the user's text (Java marks its last char here), not the longer translated one
    assertThatThrownBy(() -> MetricPatterns.compile("(?P<val_loss>\\d+) (?P<lr>[0-9"))
        .hasMessageContaining("at position 29 (marked >>): (?P<val_loss>\\d+) (?P<lr>[0->>9;");
  }
}
