package dev.stepwarden.report;

import static org.assertj.core.api.Assertions.assertThat;
import static org.assertj.core.api.Assertions.assertThatThrownBy;

import dev.stepwarden.audit.AuditLog;
import dev.stepwarden.cli.Main;
import java.io.IOException;
import java.io.PrintWriter;
import java.io.StringWriter;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.nio.file.StandardOpenOption;
import java.time.Clock;
import java.time.Instant;
import java.time.ZoneOffset;
import java.util.LinkedHashMap;
import java.util.List;
import java.util.Map;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;
import tools.jackson.core.type.TypeReference;
import tools.jackson.databind.json.JsonMapper;

class RunReportTest {
  private static final JsonMapper JSON = JsonMapper.builder().build();

  @TempDir
  Path tmp;

  @Test
  void reportsEveryLiveDecisionOfTheDemoNightWithStepGuardEvidenceAndRates() throws Exception {
    Path d = DemoRun.dir();
    List<Map<String, Object>> decisions = auditRecords(d).stream()
        .filter(r -> "decision".equals(r.get("type"))).toList();
    assertThat(decisions).as("the demo night must intervene (it starts at lr 3.0)").isNotEmpty();

    RunReport r = RunReport.load(d);
    assertThat(r.interventions()).hasSameSizeAs(decisions);
    String text = r.text();
    for (int i = 0; i < decisions.size(); i++) {
      Map<String, Object> rec = decisions.get(i);
      RunReport.Intervention iv = r.interventions().get(i);
      assertThat(iv.step()).isEqualTo(((Number) rec.get("step")).longValue());
      assertThat(iv.guard()).isEqualTo(rec.get("guard"));
      assertThat(iv.rateBefore()).isEqualTo(((Number) rec.get("rate_before")).doubleValue());
      assertThat(iv.rateAfter()).isEqualTo(((Number) rec.get("rate_after")).doubleValue());
      assertThat(text).contains("step " + iv.step() + ": guard '" + iv.guard() + "' fired: "
          + rec.get("evidence"));
      assertThat(text).contains(RunReport.fmt(iv.rateBefore()) + " -> "
          + RunReport.fmt(iv.rateAfter()));
    }
    // End state and the checkpoint to use come from the run-end record.
    assertThat(r.outcome()).isEqualTo(DemoRun.result().outcome().name().toLowerCase()
        .replace('_', '-'));
    assertThat(r.bestValidation()).isEqualTo(DemoRun.result().bestValidation());
    assertThat(r.bestValidationStep()).isEqualTo(DemoRun.result().bestValidationStep());
    // The report names the vault copy (it survives the trainer's own rotation) when there is one.
    DemoRun.result().bestCheckpoint().ifPresent(c ->
        assertThat(text).contains("checkpoint " + (c.vault() != null ? c.vault() : c.path())));
    assertThat(text).contains("0 ignored").contains("0 not confirmed").contains("intact");
    // The metrics history saw every sample the supervisor wrote.
    long lines = Files.readAllLines(d.resolve("metrics.jsonl")).size();
    assertThat(r.samples()).isEqualTo(lines);
    assertThat(r.history().badLines()).isZero();
  }

  @Test
  void jsonCarriesTheSameFactsAsTheText() throws Exception {
    RunReport r = RunReport.load(DemoRun.dir());
    String json = JSON.writeValueAsString(r.toMap());
    Map<String, Object> m = JSON.readValue(json, new TypeReference<Map<String, Object>>() {});
    @SuppressWarnings("unchecked")
    List<Map<String, Object>> ivs = (List<Map<String, Object>>) m.get("interventions");
    assertThat(ivs).hasSize(r.interventions().size());
    for (int i = 0; i < ivs.size(); i++) {
      assertThat(r.text()).contains((String) ivs.get(i).get("evidence"));
      assertThat(((Number) ivs.get(i).get("step")).longValue())
          .isEqualTo(r.interventions().get(i).step());
    }
    @SuppressWarnings("unchecked")
    Map<String, Object> best = (Map<String, Object>) m.get("best");
    assertThat(((Number) best.get("validation")).doubleValue()).isEqualTo(r.bestValidation());
  }

  @Test
  void saysSoWhenTheLastAuditLineIsTornAndKeepsEverythingBeforeIt() throws Exception {
    Path d = copyOfDemo();
    int before = RunReport.load(d).auditRecords();
    // A crash in the middle of a write: half a record, no newline.
    Files.writeString(d.resolve("audit.jsonl"), "{\"seq\":99,\"at\":\"2026-01-01T0",
        StandardOpenOption.APPEND);
    RunReport r = RunReport.load(d);
    assertThat(r.tornLastAuditLine()).isTrue();
    assertThat(r.auditRecords()).isEqualTo(before);
    assertThat(r.text()).contains("last line of the audit log is torn");
    assertThat(r.toMap().get("audit_log").toString()).contains("torn_last_line=true");
  }

  @Test
  void aRunWhoseSupervisorDiedIsUnfinishedAndStillNamesItsBestValue() throws Exception {
    Path d = copyOfDemo();
    List<String> lines = Files.readAllLines(d.resolve("audit.jsonl"));
    List<String> cut = lines.stream().filter(l -> !l.contains("\"type\":\"run-end\"")).toList();
    Files.write(d.resolve("audit.jsonl"), cut);
    RunReport r = RunReport.load(d);
    assertThat(r.outcome()).isEqualTo("unfinished");
    assertThat(r.text()).contains("no run-end record");
    // Without run-end, the best value is computed from the metrics: it must agree with the
    // supervisor's own figure.
    assertThat(r.bestValidation()).isEqualTo(DemoRun.result().bestValidation());
    assertThat(r.bestValidationStep()).isEqualTo(DemoRun.result().bestValidationStep());
  }

  @Test
  void aRunResumedAfterItsRunEndIsUnfinishedUntilItEndsAgainAndTheResumeIsTold()
      throws Exception {
    Path d = copyOfDemo();
    List<String> lines = new java.util.ArrayList<>(Files.readAllLines(d.resolve("audit.jsonl")));
    long seq = lines.size() + 1;
    // an interrupted run continued by run --resume whose supervisor then died (no second end)
    lines.add("{\"seq\":" + seq + ",\"at\":\"2026-12-02T03:00:00Z\",\"type\":\"run-resume\","
        + "\"result\":\"continuing from the vault checkpoint of step 700\"}");
    Files.write(d.resolve("audit.jsonl"), lines);
    RunReport r = RunReport.load(d);
    assertThat(r.outcome()).isEqualTo("unfinished");
    assertThat(r.text()).contains("resumed: continuing from the vault checkpoint of step 700");
  }

  @Test
  void aRewindIsToldInWordsAndDrawnAsAJumpBackWithTheAbandonedStretchFaded() throws Exception {
    Path d = rewindNight(tmp.resolve("rewind-night"), 0.4, 1.0);
    RunReport r = RunReport.load(d);
    assertThat(r.interventions()).hasSize(1);
    RunReport.Intervention iv = r.interventions().get(0);
    assertThat(iv.rewinds()).isTrue();
    assertThat(iv.resumeStep()).isEqualTo(100L);
    assertThat(r.text()).contains("rewound to the checkpoint of step 100, lowered the rate"
        + " 0.4 -> 0.2");
    assertThat(r.history().jumps()).singleElement()
        .satisfies(j -> {
          assertThat(j.fromStep()).isEqualTo(160);
          assertThat(j.toStep()).isEqualTo(101);
        });
    String html = r.html();
    assertThat(html).contains("class=\"jump\"").contains("rewind #1 to step 101")
        .contains("class=\"series abandoned\"").contains("class=\"marker\"");
  }

  @Test
  void decimationKeepsEveryBucketsTrueMinimumAndMaximumAndABoundedSize() {
    MetricsHistory h = new MetricsHistory(300);
    Map<String, Double> v = new LinkedHashMap<>();
    long n = 10_000_000L;
    long spikeStep = 7_654_321L;
    double trueMin = Double.POSITIVE_INFINITY;
    long t0 = System.nanoTime();
    for (long s = 1; s <= n; s++) {
      v.clear();
      v.put("step", (double) s);
      v.put("lr", s < 5_000_000L ? 0.1 : 0.05);
      // our own scenario: a slowly falling loss with a wobble, and one spike
      double loss = 2.0 / Math.sqrt(1 + s / 1000.0) + 0.01 * Math.sin(s * 0.37);
      if (s == spikeStep) {
        loss = 50.0;
      }
      trueMin = Math.min(trueMin, loss);
      v.put("train", loss);
      h.accept(v);
    }
    long ms = (System.nanoTime() - t0) / 1_000_000;
    List<MetricsHistory.Bucket> b = h.series("train").buckets();
    assertThat(b.size()).isLessThanOrEqualTo(2 * 300 + 1);
    assertThat(b.stream().mapToDouble(MetricsHistory.Bucket::max).max().orElseThrow())
        .isEqualTo(50.0);
    assertThat(b.stream().filter(x -> x.max() == 50.0).findFirst().orElseThrow().maxStep())
        .isEqualTo(spikeStep);
    assertThat(b.stream().mapToDouble(MetricsHistory.Bucket::min).min().orElseThrow())
        .isEqualTo(trueMin);
    assertThat(b.stream().mapToLong(MetricsHistory.Bucket::count).sum()).isEqualTo(n);
    assertThat(h.rates()).hasSize(2);
    String page = HtmlPage.render(fakeReport(h));
    System.out.printf("decimation: %d samples -> %d buckets in %d ms; page %d bytes%n", n,
        b.size(), ms, page.length());
    assertThat(page.length()).as("a 10 M-sample night still gives a small page")
        .isLessThan(200_000);
  }

  @Test
  void eachBucketHoldsTheExactExtremesOfItsOwnSamples() {
    MetricsHistory h = new MetricsHistory(8);
    Map<String, Double> v = new LinkedHashMap<>();
    double[] values = new double[1000];
    java.util.SplittableRandom rnd = new java.util.SplittableRandom(7);
    for (int s = 0; s < values.length; s++) {
      values[s] = rnd.nextDouble();
      v.clear();
      v.put("step", (double) s);
      v.put("train", values[s]);
      h.accept(v);
    }
    for (MetricsHistory.Bucket bk : h.series("train").buckets()) {
      double min = Double.POSITIVE_INFINITY;
      double max = Double.NEGATIVE_INFINITY;
      for (long s = bk.firstStep(); s <= bk.lastStep(); s++) {
        min = Math.min(min, values[(int) s]);
        max = Math.max(max, values[(int) s]);
      }
      assertThat(bk.min()).isEqualTo(min).isEqualTo(values[(int) bk.minStep()]);
      assertThat(bk.max()).isEqualTo(max).isEqualTo(values[(int) bk.maxStep()]);
      assertThat(bk.count()).isEqualTo(bk.lastStep() - bk.firstStep() + 1);
    }
  }

  @Test
  void readsNormalizedLinesWithOrWithoutTheirClosingBraceAndNonFiniteSpellings() {
    Map<String, Double> m = new LinkedHashMap<>();
    assertThat(MetricsHistory.parse("{\"step\":3,\"t\":5,\"lr\":0.1,\"train\":\"nan\"}", m))
        .isTrue();
    assertThat(m.get("train")).isNaN();
    m.clear();
    assertThat(MetricsHistory.parse("{\"step\":4,\"t\":5,\"lr\":0.1,\"train\":\"inf\"", m))
        .isTrue();
    assertThat(m.get("train")).isEqualTo(Double.POSITIVE_INFINITY);
    m.clear();
    assertThat(MetricsHistory.parse("{\"step\":4,\"t\":5,\"lr\":0.1,\"tra", m)).isTrue();
    m.clear();
    assertThat(MetricsHistory.parse("{\"ste", m)).isFalse();
    assertThat(MetricsHistory.parse("not json", m)).isFalse();
  }

  @Test
  void aFolderOfRunsGivesOneLinePerRunBestFirst() throws Exception {
    Path folder = tmp.resolve("nights");
    rewindNight(folder.resolve("b-worse"), 0.4, 1.0);
    rewindNight(folder.resolve("a-better"), 0.4, 0.5);
    // c-none reports no validation value at all: it goes last.
    Path none = rewindNight(folder.resolve("c-none"), 0.4, Double.NaN);
    Files.writeString(none.resolve("metrics.jsonl"), "");
    Files.createDirectories(folder.resolve("not-a-run"));
    Overview o = Overview.of(folder);
    assertThat(o.runs()).extracting(x -> x.dir().getFileName().toString())
        .containsExactly("a-better", "b-worse", "c-none");
    String text = o.text();
    assertThat(text.indexOf("a-better")).isLessThan(text.indexOf("b-worse"));
    assertThat(text).doesNotContain("not-a-run");

    StringWriter out = new StringWriter();
    int code = Main.execute(new String[] {"report", folder.toString(), "--json"},
        new PrintWriter(out), new PrintWriter(new StringWriter()));
    assertThat(code).isZero();
    assertThat(out.toString()).contains("\"run\" : \"a-better\"");
  }

  @Test
  void refusesAFolderThatHoldsNoRunNamingItAndTheFix() {
    StringWriter err = new StringWriter();
    int code = Main.execute(new String[] {"report", tmp.toString()},
        new PrintWriter(new StringWriter()), new PrintWriter(err));
    assertThat(code).isEqualTo(2);
    assertThat(err.toString()).contains(tmp.toString()).contains("no audit.jsonl")
        .contains("--run-dir");
    assertThatThrownBy(() -> RunReport.load(tmp)).hasMessageContaining("not a run directory");
  }

  @Test
  void cliWritesTheHtmlPageNextToTheText() throws Exception {
    Path page = tmp.resolve("out/morning.html");
    StringWriter out = new StringWriter();
    int code = Main.execute(new String[] {"report", DemoRun.dir().toString(), "--html",
        page.toString()}, new PrintWriter(out), new PrintWriter(new StringWriter()));
    assertThat(code).isZero();
    assertThat(out.toString()).contains("The night in order").contains("HTML report written");
    String html = Files.readString(page);
    assertThat(html).startsWith("<!DOCTYPE html>");
    // Self-contained: no script, no external reference of any kind (the SVG namespace name is
    // an identifier, never fetched).
    String rest = html.replace("xmlns=\"http://www.w3.org/2000/svg\"", "");
    assertThat(rest).doesNotContain("<script").doesNotContain("http:").doesNotContain("https:")
        .doesNotContain("<link").doesNotContain("@import").doesNotContain("src=");
  }

  // --- helpers -------------------------------------------------------------------------------

  private Path copyOfDemo() throws Exception {
    Path src = DemoRun.dir();
    Path d = tmp.resolve("copy");
    Files.createDirectories(d);
    for (String f : List.of("audit.jsonl", "metrics.jsonl")) {
      Files.copy(src.resolve(f), d.resolve(f));
    }
    return d;
  }

  private static List<Map<String, Object>> auditRecords(Path d) throws IOException {
    return Files.readAllLines(d.resolve("audit.jsonl")).stream()
        .map(l -> JSON.readValue(l, new TypeReference<Map<String, Object>>() {})).toList();
  }

  /**
   * Our own scenario: a night that spikes at step 160, rewinds to the checkpoint of step 100 and
   * halves the rate; written with the real audit writer.
   */
  static Path rewindNight(Path d, double rate, double valScale) throws IOException {
    Files.createDirectories(d);
    Clock clock = Clock.fixed(Instant.parse("2026-03-01T22:00:00Z"), ZoneOffset.UTC);
    try (AuditLog log = AuditLog.open(d.resolve("audit.jsonl"), clock)) {
      log.append("run-start", Map.of("name", "spiky", "learning_rate", rate));
      log.append("launch", Map.of("attempt", 1, "reason", "start", "learning_rate", rate,
          "resume_from", "", "skip_batches", 0));
      Map<String, Object> dec = new LinkedHashMap<>();
      dec.put("step", 160);
      dec.put("guard", "blow-up");
      dec.put("detector", "rises");
      dec.put("evidence", "train 9.1 is 4.2x its best 2.17 for 20 samples");
      dec.put("figures", Map.of("onset_step", 140));
      dec.put("action", List.of("rewind", "scale 0.5"));
      dec.put("rate_before", rate);
      dec.put("rate_after", rate / 2);
      dec.put("ending", "continue");
      log.append("decision", dec);
      Map<String, Object> out = new LinkedHashMap<>();
      out.put("reason", "rewind");
      out.put("resume_from", "ckpt/step-100.ckpt");
      out.put("resume_step", 100);
      out.put("learning_rate", rate / 2);
      out.put("result", "restarting from the checkpoint of step 100");
      log.append("outcome", out);
      log.append("launch", Map.of("attempt", 2, "reason", "rewind", "learning_rate", rate / 2,
          "resume_from", "ckpt/step-100.ckpt", "skip_batches", 0));
      log.append("trainer-exit", Map.of("exit_code", 0, "step", 300));
      Map<String, Object> end = new LinkedHashMap<>();
      end.put("outcome", "finished");
      end.put("exit_code", 0);
      end.put("reason", "the trainer finished normally");
      end.put("interventions", 1);
      end.put("final_learning_rate", rate / 2);
      log.append("run-end", end);
    }
    StringBuilder m = new StringBuilder();
    long t = 1_800_000_000_000L;
    for (int s = 1; s <= 160; s++) {
      double loss = s < 140 ? 2.0 / Math.sqrt(s) : 9.0;
      m.append(line(s, t + s, rate, loss, s % 20 == 0 ? valScale * 3.0 / Math.sqrt(s) : Double.NaN));
    }
    for (int s = 101; s <= 300; s++) {
      m.append(line(s, t + 200 + s, rate / 2, 1.8 / Math.sqrt(s),
          s % 20 == 0 ? valScale * 2.8 / Math.sqrt(s) : Double.NaN));
    }
    Files.writeString(d.resolve("metrics.jsonl"), m.toString(), StandardCharsets.UTF_8);
    return d;
  }

  private static String line(long step, long t, double lr, double train, double val) {
    return "{\"step\":" + step + ",\"t\":" + t + ",\"lr\":" + lr + ",\"train\":" + train
        + (Double.isNaN(val) ? "" : ",\"validation\":" + val) + "}\n";
  }

  private RunReport fakeReport(MetricsHistory h) {
    try {
      Path d = rewindNight(tmp.resolve("big"), 0.1, 1.0);
      RunReport base = RunReport.load(d);
      return withHistory(base, h);
    } catch (IOException e) {
      throw new java.io.UncheckedIOException(e);
    }
  }

  private static RunReport withHistory(RunReport base, MetricsHistory h) {
    return base.withHistory(h);
  }
}
