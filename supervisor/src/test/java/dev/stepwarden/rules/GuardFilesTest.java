package dev.stepwarden.rules;

import static org.assertj.core.api.Assertions.assertThat;
import static org.assertj.core.api.Assertions.assertThatThrownBy;

import dev.stepwarden.metrics.ReadPlan;
import java.nio.charset.StandardCharsets;
import java.nio.file.Path;
import java.time.Duration;
import org.junit.jupiter.api.Test;

class GuardFilesTest {
  static final String SKETCH = String.join("\n",
      "run:",
      "  name: sensor-net",
      "  command: [python3, train.py, --lr, \"{learning_rate}\", --resume, \"{resume_from}\"]",
      "  learning_rate: 0.1",
      "read:",
      "  from: stdout",
      "  format: json",
      "  step: step",
      "  series: { train: loss, validation: val_loss }",
      "steer:",
      "  by: control-file",
      "checkpoints:",
      "  watch: ckpt/*.pt",
      "  keep: 5",
      "guards:",
      "  - name: blow-up",
      "    when: { rises: { series: train, above_level: 3.0, samples: 3 } }",
      "    do: [ rewind, { scale: 0.5 } ]",
      "  - name: flat-validation",
      "    when: { flattens: { series: validation, over: 5, gain_below: 0.5% } }",
      "    do: { scale: 0.5 }",
      "    then_wait: 3",
      "limits:",
      "  learning_rate: { min: 1.0e-6, max: 1.0 }",
      "  rewinds: 5",
      "  crash_restarts: 3",
      "  silence: 15m",
      "");

  static GuardFile parse(String yaml) throws ConfigException {
    return GuardFiles.parse(yaml.getBytes(StandardCharsets.UTF_8), Path.of("t.yaml"));
  }

  static ConfigException refusal(String yaml) {
    try {
      parse(yaml);
    } catch (ConfigException e) {
      return e;
    }
    throw new AssertionError("expected the file to be refused:\n" + yaml);
  }

  @Test
  void loadsTheBriefSketchWithUnitsAndDefaults() throws Exception {
    GuardFile g = parse(SKETCH);
    assertThat(g.run().name()).isEqualTo("sensor-net");
    assertThat(g.run().command()).containsExactly("python3", "train.py", "--lr",
        "{learning_rate}", "--resume", "{resume_from}");
    assertThat(g.run().learningRate()).isEqualTo(0.1);
    assertThat(g.run().stopGrace()).isEqualTo(Duration.ofSeconds(30));
    assertThat(g.read().source()).isEqualTo(ReadPlan.Source.STDOUT);
    assertThat(g.read().series()).containsEntry("train", "loss")
        .containsEntry("validation", "val_loss");
    assertThat(g.guards()).hasSize(2);
    GuardFile.Guard flat = g.guards().get(1);
    assertThat(flat.when().detector()).isEqualTo("flattens");
    assertThat(flat.when().number("gain_below")).isEqualTo(0.005);
    assertThat(flat.when().integer("over")).isEqualTo(5);
    assertThat(flat.thenWait()).isEqualTo(3);
    assertThat(flat.actions()).containsExactly(new GuardFile.Action.Scale(0.5));
    assertThat(g.guards().get(0).rewinds()).isTrue();
    assertThat(g.limits().silence()).isEqualTo(Duration.ofMinutes(15));
    assertThat(g.limits().startupSilence()).isEqualTo(Duration.ofHours(1)); // the default
    assertThat(g.limits().minRate()).isEqualTo(1e-6);
    assertThat(g.checkpoints()).hasValueSatisfying(c -> assertThat(c.keep()).isEqualTo(5));
  }

  @Test
  void theFirstMetricLimitIsNeverShorterThanSilenceAndZeroMeansNoLimit() throws Exception {
    assertThat(parse(SKETCH.replace("silence: 15m", "silence: 15m\n  first_metric: 5m"))
        .limits().startupSilence()).isEqualTo(Duration.ofMinutes(15));
    assertThat(parse(SKETCH.replace("silence: 15m", "silence: 15m\n  first_metric: 2h"))
        .limits().startupSilence()).isEqualTo(Duration.ofHours(2));
    assertThat(parse(SKETCH.replace("silence: 15m", "silence: 15m\n  first_metric: 0"))
        .limits().startupSilence()).isZero();
    assertThat(parse(SKETCH.replace("silence: 15m", "silence: 0")).limits().startupSilence())
        .isZero(); // no watchdog at all
  }

  @Test
  void misspeltKeyIsRefusedWithLineColumnAndSuggestion() {
    ConfigException e = refusal(SKETCH.replace("    then_wait: 3", "    then_wiat: 3"));
    assertThat(e.line()).isEqualTo(22);
    assertThat(e.column()).isEqualTo(5);
    assertThat(e.getMessage()).startsWith("t.yaml:22:5: unknown key 'then_wiat'")
        .contains("did you mean 'then_wait'?");
  }

  @Test
  void misspeltDetectorGetsASuggestion() {
    ConfigException e = refusal(SKETCH.replace("flattens:", "flatens:"));
    assertThat(e.getMessage()).contains("unknown detector 'flatens'")
        .contains("did you mean 'flattens'?");
    assertThat(e.line()).isEqualTo(20);
  }

  @Test
  void duplicateKeysAreRefusedNamingTheFirst() {
    ConfigException e = refusal("run:\n  learning_rate: 0.1\n  learning_rate: 0.2\n");
    assertThat(e.getMessage()).contains("'learning_rate' appears twice")
        .contains("first at line 2");
    assertThat(e.line()).isEqualTo(3);
  }

  @Test
  void aliasesAndAnchorsAreRefused() {
    ConfigException e = refusal("run: &r\n  learning_rate: 0.1\nread: *r\n");
    assertThat(e.getMessage()).contains("anchors");
    ConfigException bomb = refusal("a: &a [\"x\",\"x\"]\nb: &b [*a,*a]\nc: [*b,*b]\n");
    assertThat(bomb.getMessage()).contains("not accepted");
  }

  @Test
  void emptyFileAndTabsGetPlainMessages() {
    assertThat(refusal("").getMessage()).contains("the file is empty");
    ConfigException tabs = refusal("run:\n\tlearning_rate: 0.1\n");
    assertThat(tabs.getMessage()).contains("indented with a tab");
    assertThat(tabs.line()).isEqualTo(2);
  }

  @Test
  void wrongTypesAndRangesNameTheKey() {
    assertThat(refusal("run:\n  learning_rate: fast\n").getMessage())
        .contains("run.learning_rate must be a number, not 'fast'");
    assertThat(refusal(SKETCH.replace("over: 5,", "over: -5,")).getMessage())
        .contains("over is -5; it must lie between 2 and");
    assertThat(refusal(SKETCH.replace("silence: 15m", "silence: 15 minutes")).getMessage())
        .contains("duration such as 30s");
  }

  @Test
  void contradictoryLimitsAreRefused() {
    assertThat(refusal(SKETCH.replace("{ min: 1.0e-6, max: 1.0 }", "{ min: 0.5, max: 0.1 }"))
        .getMessage()).contains("min 0.5 >= max 0.1");
    assertThat(refusal(SKETCH.replace("learning_rate: 0.1", "learning_rate: 5"))
        .getMessage()).contains("outside limits.learning_rate");
  }

  @Test
  void guardOnAnUnknownSeriesIsRefused() {
    ConfigException e = refusal(SKETCH.replace("series: validation, over: 5",
        "series: valid, over: 5"));
    assertThat(e.getMessage()).contains("watches series 'valid'")
        .contains("did you mean 'validation'?");
  }

  @Test
  void checkpointGlobOutsideTheWorkdirIsRefused() {
    assertThat(refusal(SKETCH.replace("ckpt/*.pt", "../elsewhere/*.pt")).getMessage())
        .contains("leaves the working directory");
    assertThat(refusal(SKETCH.replace("ckpt/*.pt", "/etc/*")).getMessage())
        .contains("leaves the working directory");
  }

  @Test
  void missingProgramAndUnknownPlaceholderAreRefused() {
    assertThat(refusal(SKETCH.replace("[python3,", "[no-such-trainer-xyz,")).getMessage())
        .contains("'no-such-trainer-xyz' is not on the PATH");
    assertThat(refusal(SKETCH.replace("{resume_from}", "{resume}")).getMessage())
        .contains("unknown placeholder {resume}").contains("did you mean 'resume_from'?");
  }

  @Test
  void conflictingActionsAreRefused() {
    assertThat(refusal(SKETCH.replace("[ rewind, { scale: 0.5 } ]", "[ stop, { scale: 0.5 } ]"))
        .getMessage()).contains("combines stop or give_up");
    assertThat(refusal(SKETCH.replace("[ rewind, { scale: 0.5 } ]",
        "[ { scale: 0.5 }, { set_rate: 0.1 } ]")).getMessage()).contains("changes the rate twice");
  }

  @Test
  void duplicateGuardNamesAreRefused() {
    assertThat(refusal(SKETCH.replace("name: blow-up", "name: flat-validation")).getMessage())
        .contains("two guards are named 'flat-validation'");
  }

  @Test
  void oversizedAndDeeplyNestedFilesAreRefused() {
    StringBuilder deep = new StringBuilder("run:\n");
    for (int i = 0; i < 40; i++) {
      deep.append("  ".repeat(i + 1)).append("k").append(i).append(":\n");
    }
    deep.append("  ".repeat(41)).append("v\n");
    assertThat(refusal(deep.toString()).getMessage()).contains("nesting is deeper than 32");
    String big = "run:\n  learning_rate: 0.1\n#" + "x".repeat(YamlReader.MAX_BYTES) + "\n";
    assertThat(refusal(big).getMessage()).contains("at most 1048576 bytes");
  }

  @Test
  void editDistanceCountsASwapAsOneEdit() {
    assertThat(GuardFiles.editDistance("then_wiat", "then_wait")).isEqualTo(1);
    assertThat(GuardFiles.editDistance("kitten", "sitting")).isEqualTo(3);
  }
}
