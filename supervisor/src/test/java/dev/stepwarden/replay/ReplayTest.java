package dev.stepwarden.replay;

import static org.assertj.core.api.Assertions.assertThat;
import static org.assertj.core.api.Assertions.assertThatThrownBy;

import dev.stepwarden.cli.Main;
import dev.stepwarden.report.DemoRun;
import dev.stepwarden.rules.GuardFile;
import dev.stepwarden.rules.GuardFiles;
import java.io.IOException;
import java.io.PrintWriter;
import java.io.StringWriter;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.List;
import java.util.Locale;
import java.util.Map;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;
import tools.jackson.core.type.TypeReference;
import tools.jackson.databind.json.JsonMapper;

class ReplayTest {
  private static final JsonMapper JSON = JsonMapper.builder().build();

  @TempDir
  Path tmp;

  @Test
  void replayOfTheDemoRunsNormalizedMetricsReproducesItsLiveInterventionsAtTheSameSteps()
      throws Exception {
    Path d = DemoRun.dir();
    List<Map<String, Object>> live = decisions(d);
    assertThat(live).as("the demo night intervenes").isNotEmpty();

    GuardFile rules = GuardFiles.load(DemoRun.rules());
    Replay.Result r = Replay.run(rules, d.resolve("metrics.jsonl"));
    assertThat(r.input()).isEqualTo(Replay.Input.NORMALIZED);
    Replay.Fired first = r.first().orElseThrow();
    assertThat(first.decision().step()).isEqualTo(num(live.get(0).get("step")));
    assertThat(first.decision().guard()).isEqualTo(live.get(0).get("guard"));
    assertThat(first.decision().evidence().summary()).isEqualTo(live.get(0).get("evidence"));
    assertThat(first.decision().rateAfter())
        .isEqualTo(((Number) live.get(0).get("rate_after")).doubleValue());
    assertThat(first.hypothetical()).isFalse();
    // The same engine on the same samples: the whole night comes out the same, and since the
    // recorded rate followed the replay's, nothing is hypothetical.
    assertThat(r.fired()).extracting(f -> f.decision().step())
        .containsExactlyElementsOf(live.stream().map(m -> num(m.get("step"))).toList());
    assertThat(r.departedAtStep()).isEqualTo(-1);
    assertThat(r.fired()).noneMatch(Replay.Fired::hypothetical);
    System.out.printf(Locale.ROOT, "replay of the demo night: %d samples at %.0f samples/s%n",
        r.samples(), r.samplesPerSecond());
  }

  @Test
  void theTrainersRawLogGivesTheSameFirstInterventionThenMarksLaterOnesHypothetical()
      throws Exception {
    Path d = DemoRun.dir();
    List<Map<String, Object>> live = decisions(d);
    GuardFile rules = GuardFiles.load(DemoRun.rules());
    Replay.Result r = Replay.run(rules, d.resolve("trainer.stdout.log"));
    assertThat(r.input()).isEqualTo(Replay.Input.RAW);
    assertThat(r.first().orElseThrow().decision().step()).isEqualTo(num(live.get(0).get("step")));
    assertThat(r.first().get().hypothetical()).isFalse();
    // A raw log does not say what the supervisor did: after the first rate change the replay
    // is off the recorded course.
    assertThat(r.departedAtStep()).isEqualTo(num(live.get(0).get("step")));
    assertThat(r.fired().subList(1, r.fired().size())).allMatch(Replay.Fired::hypothetical);
    String text = ReplayText.text(r, "trainer.stdout.log", "guards.yaml", 3);
    assertThat(text).contains("the recorded curve no longer shows what would have happened")
        .contains("[hypothetical]");
  }

  @Test
  void otherGuardsOverTheSameRecordingLeaveTheRecordedCourseAtTheirFirstRateChange()
      throws Exception {
    Path d = DemoRun.dir();
    String yaml = Files.readString(DemoRun.rules()).replace("do: { scale: 0.5 }",
        "do: { scale: 0.25 }");
    Path other = tmp.resolve("quarter.yaml");
    Files.writeString(other, yaml);
    Replay.Result r = Replay.run(GuardFiles.load(other), d.resolve("metrics.jsonl"));
    Replay.Fired first = r.first().orElseThrow();
    assertThat(first.hypothetical()).isFalse();
    assertThat(first.decision().rateAfter()).isEqualTo(0.75); // 3.0 x 0.25
    // The next sample was recorded at the live run's 1.5: that is where the courses part.
    assertThat(r.departedAtStep()).isGreaterThan(first.decision().step());
    assertThat(r.departure()).contains("recorded run was at rate 1.5").contains("0.75");
    assertThat(r.fired().subList(1, r.fired().size())).allMatch(Replay.Fired::hypothetical);
  }

  @Test
  void csvWithAHeaderRowIsReadThroughTheGuardFilesKeys() throws Exception {
    // Our own scenario: validation improves to 0.50 at step 40, then stays flat; the
    // flattens guard (over 3, gain below 1 %) must fire on the third flat evaluation.
    StringBuilder csv = new StringBuilder("step,loss,val_loss\n");
    double[] val = {0.90, 0.70, 0.60, 0.50, 0.501, 0.499, 0.500, 0.502};
    for (int s = 1; s <= 80; s++) {
      String v = s % 10 == 0 ? String.valueOf(val[s / 10 - 1]) : "";
      csv.append(s).append(',').append(1.0 / s).append(',').append(v).append('\n');
    }
    Path file = tmp.resolve("night.csv");
    Files.writeString(file, csv);
    Path rules = tmp.resolve("g.yaml");
    Files.writeString(rules, """
        run: { name: csv-night, learning_rate: 0.1 }
        read: { from: stdout, format: json, step: step, series: { train: loss, validation: val_loss } }
        guards:
          - name: flat-validation
            when: { flattens: { series: validation, over: 3, gain_below: 1% } }
            do: { scale: 0.5 }
        limits: { learning_rate: { min: 0.001, max: 1.0 } }
        """);
    Replay.Result r = Replay.run(GuardFiles.load(rules), file);
    assertThat(r.input()).isEqualTo(Replay.Input.CSV);
    assertThat(r.samples()).isEqualTo(80);
    Replay.Fired f = r.first().orElseThrow();
    assertThat(f.decision().guard()).isEqualTo("flat-validation");
    // Best 0.50 at step 40; steps 50, 60, 70 bring no 1 % gain: fires at step 70.
    assertThat(f.decision().step()).isEqualTo(70);
    assertThat(f.decision().rateAfter()).isEqualTo(0.05);
  }

  @Test
  void aRewindTheRecordingDoesNotShowEndsTheRecordedCourse() throws Exception {
    // Our own scenario: a raw JSON log whose loss blows up at step 30 and keeps growing
    // (doubling each step), so each fresh window after a rewind sees it rise again.
    StringBuilder log = new StringBuilder();
    for (int s = 1; s <= 60; s++) {
      double loss = s < 30 ? 1.0 / Math.sqrt(s) : 10.0 * Math.pow(2, s - 30);
      log.append("{\"step\":").append(s).append(",\"loss\":").append(loss).append("}\n");
      log.append("epoch progress ").append(s).append("/60\n"); // a line to ignore
    }
    Path file = tmp.resolve("blowup.log");
    Files.writeString(file, log);
    Path rules = tmp.resolve("g.yaml");
    Files.writeString(rules, """
        run: { name: blowup, learning_rate: 0.4 }
        read: { from: stdout, format: json, step: step, series: { train: loss } }
        guards:
          - name: blow-up
            when: { rises: { series: train, above_level: 3x, samples: 5 } }
            do: [ rewind, { scale: 0.5 } ]
        limits: { learning_rate: { min: 0.01, max: 1.0 }, rewinds: 2 }
        """);
    Replay.Result r = Replay.run(GuardFiles.load(rules), file);
    assertThat(r.input()).isEqualTo(Replay.Input.RAW);
    // Every sample line is followed by a progress line; reading stops at the ending decision.
    assertThat(r.ignoredLines()).isEqualTo(r.samples() - 1);
    assertThat(r.unreadLines()).isPositive();
    assertThat(r.fired()).isNotEmpty();
    assertThat(r.first().get().decision().rewinds()).isTrue();
    assertThat(r.departedAtStep()).isEqualTo(r.first().get().decision().step());
    // Third firing: the rewind budget (2) is spent, the run would have given up there.
    assertThat(r.fired()).hasSize(3);
    assertThat(r.fired().get(2).decision().ending().name()).isEqualTo("GIVE_UP");
    assertThat(r.endedAtStep()).isEqualTo(r.fired().get(2).decision().step());
    assertThat(ReplayText.text(r, "blowup.log", "g.yaml", 1)).contains("would have ended at"
        + " step " + r.endedAtStep());
  }

  @Test
  void detectsTheKindOfFile() throws IOException {
    Path n = tmp.resolve("metrics.jsonl");
    Files.writeString(n, "{\"step\":1,\"t\":5,\"lr\":0.1,\"train\":1.0\n");
    Path c = tmp.resolve("log.txt");
    Files.writeString(c, "step,loss\n1,0.5\n");
    Path raw = tmp.resolve("out.log");
    Files.writeString(raw, "{\"step\":1,\"loss\":0.5}\n");
    assertThat(Replay.detect(n)).isEqualTo(Replay.Input.NORMALIZED);
    assertThat(Replay.detect(c)).isEqualTo(Replay.Input.CSV);
    assertThat(Replay.detect(raw)).isEqualTo(Replay.Input.RAW);
    Path semi = tmp.resolve("semi.txt");
    Files.writeString(semi, "step;loss;val_loss\n1;0.5;\n");
    assertThat(Replay.detect(semi)).isEqualTo(Replay.Input.CSV);
    assertThat(Replay.wallTime("{\"step\":1,\"t\":1796163932920,\"lr\":3.0"))
        .isEqualTo(1796163932920L);
  }

  @Test
  void aSemicolonCsvGivesTheSameSamplesInReplayAsInARunsIntake() throws Exception {
    // Our own scenario, written as a spreadsheet in a decimal-comma locale exports it: a byte
    // order mark, semicolons, quoted names, one loss of "1,5" (1.5 or 15?) that must be passed
    // over, not read as 1.
    StringBuilder csv = new StringBuilder("\uFEFF\"step\";\"loss\";\"val_loss\"\n");
    for (int s = 1; s <= 30; s++) {
      String loss = s == 12 ? "1,5" : String.valueOf(1.0 / s);
      csv.append(s).append(';').append(loss).append(';').append(s % 10 == 0 ? "0.5" : "")
          .append('\n');
    }
    Path file = tmp.resolve("export.txt");
    Files.writeString(file, csv);
    Path rules = tmp.resolve("g.yaml");
    Files.writeString(rules, """
        run: { name: csv-night, learning_rate: 0.1 }
        read: { file: export.txt, format: csv, series: { train: loss, validation: val_loss } }
        guards:
          - name: flat-validation
            when: { flattens: { series: validation, over: 3, gain_below: 1% } }
            do: { scale: 0.5 }
        limits: { learning_rate: { min: 0.001, max: 1.0 } }
        """);
    GuardFile g = GuardFiles.load(rules);
    dev.stepwarden.metrics.MetricsIntake live = new dev.stepwarden.metrics.MetricsIntake(g.read());
    long liveSamples = Files.readAllLines(file).stream()
        .map(l -> live.accept(l, 0)).filter(x -> x != null && x.sample() != null).count();
    assertThat(Replay.detect(file)).isEqualTo(Replay.Input.CSV);
    Replay.Result r = Replay.run(g, file);
    assertThat(r.samples()).isEqualTo(liveSamples).isEqualTo(29); // row 12 has no value left
    assertThat(r.ambiguousValues()).isEqualTo(1);
    assertThat(live.ambiguousValues()).isEqualTo(1);
    assertThat(ReplayText.text(r, "export.txt", "g.yaml", 1)).contains("read two ways");
  }

  @Test
  void aPairsLogWithAThousandsSeparatorIsNotReadAsTheFirstGroup() throws Exception {
    Path file = tmp.resolve("train.log");
    Files.writeString(file, "step=1 loss=1,234.5 lr=0.1\nstep=2 loss=0.9, lr=0.1\n");
    Path rules = tmp.resolve("g.yaml");
    Files.writeString(rules, """
        run: { name: pairs, learning_rate: 0.1 }
        read: { from: stdout, format: pairs, series: { train: loss } }
        guards:
          - name: blow-up
            when: { rises: { series: train, above_level: 3x, samples: 2 } }
            do: { scale: 0.5 }
        """);
    Replay.Result r = Replay.run(GuardFiles.load(rules), file);
    // line 1: loss is ambiguous and passed over (no sample); line 2: "0.9," is 0.9
    assertThat(r.samples()).isEqualTo(1);
    assertThat(r.ambiguousValues()).isEqualTo(1);
  }

  @Test
  void pythonDictLinesAreReadByReadFormatPythonDict() throws Exception {
    Path log = Path.of("src/test/resources/python-dict/trainer.log");
    Path rules = tmp.resolve("g.yaml");
    Files.writeString(rules, """
        run: { name: dict-lines, learning_rate: 5.0e-5 }
        read: { from: stdout, format: python-dict, rate: learning_rate,
                series: { train: loss, validation: eval_loss } }
        guards:
          - name: broken
            when: { breaks: { series: train } }
            do: { scale: 0.5 }
        limits: { learning_rate: { min: 1.0e-7, max: 1.0 } }
        """);
    Replay.Result r = Replay.run(GuardFiles.load(rules), log);
    assertThat(r.input()).isEqualTo(Replay.Input.RAW);
    // 240 training lines and 24 evaluation lines, every one a sample
    assertThat(r.samples()).isEqualTo(264);
    // the one nan loss (step 77) is read as non-finite, so the guard sees it
    assertThat(r.first().orElseThrow().decision().step()).isEqualTo(77);
    System.out.printf(Locale.ROOT, "python-dict replay: %d samples%n", r.samples());
  }

  @Test
  void anEventFileIsReadByReadFormatTfrecordAndDetectedByItsName() throws Exception {
    Path events = Path.of("src/test/resources/events/events.out.tfevents.1790000000.reference");
    Path rules = tmp.resolve("g.yaml");
    Files.writeString(rules, """
        run: { name: events, learning_rate: 0.1 }
        read: { file: logs, format: tfrecord, series: { train: loss, validation: val_loss } }
        guards:
          - name: flat-validation
            when: { flattens: { series: validation, over: 5, gain_below: 0.5% } }
            do: { scale: 0.5 }
        limits: { learning_rate: { min: 0.001, max: 1.0 } }
        """);
    GuardFile g = GuardFiles.load(rules);
    assertThat(Replay.detect(events)).isEqualTo(Replay.Input.EVENTS);
    Replay.Result r = Replay.run(g, events);
    // 250 loss events and 50 validation events (which also carry lr and non-scalars)
    assertThat(r.samples()).isEqualTo(300);
    assertThat(r.lines()).isEqualTo(300);
    // the same through --input raw: the guard file says the file is an event file
    assertThat(Replay.run(g, events, Replay.Input.RAW).samples()).isEqualTo(300);
    System.out.printf(Locale.ROOT, "event-file replay: %d samples, %d decisions%n",
        r.samples(), r.fired().size());
  }

  @Test
  void cliPrintsJsonForScriptsAndRefusesAMissingFileClearly() throws Exception {
    Path d = DemoRun.dir();
    StringWriter out = new StringWriter();
    int code = Main.execute(new String[] {"replay", "--rules", DemoRun.rules().toString(),
        d.toString(), "--json"}, new PrintWriter(out), new PrintWriter(new StringWriter()));
    assertThat(code).isZero();
    Map<String, Object> m = JSON.readValue(out.toString(),
        new TypeReference<Map<String, Object>>() {});
    assertThat(m.get("input")).isEqualTo("normalized");
    @SuppressWarnings("unchecked")
    List<Map<String, Object>> ds = (List<Map<String, Object>>) m.get("decisions");
    assertThat(num(ds.get(0).get("step"))).isEqualTo(num(decisions(d).get(0).get("step")));

    StringWriter err = new StringWriter();
    code = Main.execute(new String[] {"replay", "--rules", DemoRun.rules().toString(),
        tmp.resolve("nope.jsonl").toString()}, new PrintWriter(new StringWriter()),
        new PrintWriter(err));
    assertThat(code).isEqualTo(2);
    assertThat(err.toString()).contains("nope.jsonl").contains("no such file");
    assertThatThrownBy(() -> Replay.run(GuardFiles.load(DemoRun.rules()), tmp.resolve("x")))
        .hasMessageContaining("no such file");
  }

  @Test
  void printsHowFastReplayAndLiveIntakeGoOnALongRecording() throws Exception {
    // A 200 000-sample normalized recording of our own; the figure is printed, not asserted.
    StringBuilder b = new StringBuilder();
    for (int s = 1; s <= 200_000; s++) {
      b.append("{\"step\":").append(s).append(",\"t\":").append(1_800_000_000_000L + s)
          .append(",\"lr\":0.1,\"train\":").append(1.0 + 0.1 * Math.sin(s))
          .append(s % 100 == 0 ? ",\"validation\":" + Math.pow(0.98, s / 100.0) : "").append("}\n");
    }
    Path file = tmp.resolve("long.jsonl");
    Files.writeString(file, b);
    GuardFile rules = GuardFiles.load(DemoRun.rules());
    List<String> lines = Files.readAllLines(file);
    double live = 0;
    Replay.Result r = null;
    for (int round = 0; round < 2; round++) { // the first round warms the JIT up
      r = Replay.run(rules, file);
      // Live intake for comparison: the same intake and engine on the same lines, in memory
      // (what the supervisor's pump does per line, minus the pipe and the normalized write).
      dev.stepwarden.metrics.MetricsIntake intake = new dev.stepwarden.metrics.MetricsIntake(
          Replay.normalizedPlan(rules.read()));
      dev.stepwarden.engine.GuardEngine engine = new dev.stepwarden.engine.GuardEngine(rules);
      long t0 = System.nanoTime();
      for (String l : lines) {
        var reading = intake.accept(l, 0);
        if (reading != null && reading.sample() != null) {
          engine.onSample(reading.sample());
        }
      }
      live = lines.size() * 1e9 / (System.nanoTime() - t0);
    }
    assertThat(r.samples()).isEqualTo(200_000);
    assertThat(r.endedAtStep()).isEqualTo(-1);
    System.out.printf(Locale.ROOT, "replay %.0f samples/s (from the file); live intake + engine"
        + " %.0f samples/s (in memory, no pipe)%n", r.samplesPerSecond(), live);
  }

  private static List<Map<String, Object>> decisions(Path d) throws IOException {
    return Files.readAllLines(d.resolve("audit.jsonl")).stream()
        .map(l -> JSON.readValue(l, new TypeReference<Map<String, Object>>() {}))
        .filter(m -> "decision".equals(m.get("type"))).toList();
  }

  private static long num(Object o) {
    return ((Number) o).longValue();
  }
}
