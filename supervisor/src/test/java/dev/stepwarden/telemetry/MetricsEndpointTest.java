package dev.stepwarden.telemetry;

import static org.assertj.core.api.Assertions.assertThat;

import dev.stepwarden.rules.GuardFile;
import dev.stepwarden.rules.GuardFiles;
import dev.stepwarden.supervise.RunOutcome;
import dev.stepwarden.supervise.RunOptions;
import dev.stepwarden.supervise.Supervisor;
import io.micrometer.prometheusmetrics.PrometheusMeterRegistry;
import java.io.ByteArrayOutputStream;
import java.io.PrintStream;
import java.net.URI;
import java.net.http.HttpClient;
import java.net.http.HttpRequest;
import java.net.http.HttpResponse;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.List;
import java.util.concurrent.ExecutorService;
import java.util.concurrent.Executors;
import java.util.concurrent.Future;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;

class MetricsEndpointTest {
  @TempDir
  Path tmp;

  static String get(HttpClient http, int port) throws Exception {
    HttpResponse<String> r = http.send(HttpRequest.newBuilder(
        URI.create("http://127.0.0.1:" + port + "/metrics")).build(),
        HttpResponse.BodyHandlers.ofString());
    assertThat(r.statusCode()).isEqualTo(200);
    assertThat(r.headers().firstValue("Content-Type")).hasValue(MetricsServer.CONTENT_TYPE);
    return r.body();
  }

  @Test
  void scrapeDuringARunShowsTheCurrentRateAndTheMetersGoWhenItEnds() throws Exception {
    // Our own stand-in trainer: two metric lines, one chatter line, then it waits for the test.
    Path release = tmp.resolve("release");
    String script = "echo '{\"step\": 1, \"loss\": 2.5}'; echo 'warming up';"
        + " echo '{\"step\": 2, \"loss\": 2.0, \"val_loss\": 2.2}';"
        + " while [ ! -f " + release + " ]; do sleep 0.05; done";
    String yaml = "run:\n  name: night-1\n  learning_rate: 0.025\n  stop_grace: 2s\n";
    GuardFile g = GuardFiles.parse(yaml.getBytes(StandardCharsets.UTF_8), tmp.resolve("g.yaml"))
        .withCommand(List.of("sh", "-c", script));
    PrometheusMeterRegistry registry = MetricsServer.newRegistry();
    RunMeters meters = RunMeters.of(registry, g, null);
    HttpClient http = HttpClient.newHttpClient();
    ExecutorService ex = Executors.newSingleThreadExecutor();
    try (MetricsServer server = MetricsServer.start(registry, "127.0.0.1", 0)) {
      Supervisor s = new Supervisor(g, new RunOptions(tmp.resolve("run"), true, null,
          new PrintStream(new ByteArrayOutputStream(), true, StandardCharsets.UTF_8), meters));
      Future<Supervisor.Result> run = ex.submit(s::run);
      // A scrape is a snapshot: the meters follow each line (the series value first, then the
      // line counts), so poll until the third line's state is complete, within 5 s.
      String page = "";
      for (int i = 0; i < 200 && !(page.contains("series=\"validation\"")
          && page.contains("stepwarden_lines_read_total{run=\"night-1\"} 3.0")); i++) {
        Thread.sleep(25);
        page = get(http, server.port());
      }
      assertThat(page).contains("stepwarden_learning_rate{run=\"night-1\"} 0.025")
          .contains("stepwarden_series_last{run=\"night-1\",series=\"validation\"} 2.2")
          .contains("stepwarden_lines_read_total{run=\"night-1\"} 3.0")
          .contains("stepwarden_lines_ignored_total{run=\"night-1\"} 1.0");

      Files.writeString(release, "");
      assertThat(run.get().outcome()).isEqualTo(RunOutcome.FINISHED);
      assertThat(get(http, server.port())).doesNotContain("run=\"night-1\"");
    } finally {
      Files.writeString(release, "");
      ex.shutdownNow();
    }
  }

  @Test
  void answersExactlyTheMetricsPathAndNothingThatOnlyStartsLikeIt() throws Exception {
    HttpClient http = HttpClient.newHttpClient();
    try (MetricsServer server = MetricsServer.start(MetricsServer.newRegistry(), "127.0.0.1",
        0)) {
      get(http, server.port());
      for (String path : new String[] {"/metricsXYZ", "/metrics/", "/metrics/x", "/", "/m"}) {
        HttpResponse<String> r = http.send(HttpRequest.newBuilder(
            URI.create("http://127.0.0.1:" + server.port() + path)).build(),
            HttpResponse.BodyHandlers.ofString());
        assertThat(r.statusCode()).as(path).isEqualTo(404);
      }
    }
  }

  @Test
  void refusesATakenPortWithAMessageNamingIt() throws Exception {
    try (MetricsServer first = MetricsServer.start(MetricsServer.newRegistry(), "127.0.0.1", 0)) {
      int port = first.port();
      Throwable t = org.assertj.core.api.Assertions.catchThrowable(() ->
          MetricsServer.start(MetricsServer.newRegistry(), "127.0.0.1", port));
      assertThat(t).hasMessageContaining("127.0.0.1:" + port).hasMessageContaining(
          "--metrics-port");
    }
  }
}
