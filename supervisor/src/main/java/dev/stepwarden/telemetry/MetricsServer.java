package dev.stepwarden.telemetry;

import com.sun.net.httpserver.HttpExchange;
import com.sun.net.httpserver.HttpServer;
import io.micrometer.prometheusmetrics.PrometheusConfig;
import io.micrometer.prometheusmetrics.PrometheusMeterRegistry;
import java.io.IOException;
import java.io.OutputStream;
import java.net.InetAddress;
import java.net.InetSocketAddress;
import java.nio.charset.StandardCharsets;
import java.util.concurrent.ExecutorService;
import java.util.concurrent.Executors;

/**
 * Serves a {@link PrometheusMeterRegistry} as {@code GET /metrics} in the Prometheus text format,
 * with the JDK's own HTTP server (no web framework for one read-only page).
 *
 * <p>Bound to 127.0.0.1 unless told otherwise: the page names runs and guards, which is nobody
 * else's business; expose it through a reverse proxy or a scrape sidecar when needed.
 */
public final class MetricsServer implements AutoCloseable {
  static final String CONTENT_TYPE = "text/plain; version=0.0.4; charset=utf-8";

  private final HttpServer server;
  private final ExecutorService executor;
  private final PrometheusMeterRegistry registry;

  private MetricsServer(HttpServer server, ExecutorService executor,
      PrometheusMeterRegistry registry) {
    this.server = server;
    this.executor = executor;
    this.registry = registry;
  }

  /** A registry for stepwarden meters. */
  public static PrometheusMeterRegistry newRegistry() {
    PrometheusMeterRegistry r = new PrometheusMeterRegistry(PrometheusConfig.DEFAULT);
    // the build behind the page, as an info-style gauge of constant 1 (Prometheus practice)
    String v = MetricsServer.class.getPackage().getImplementationVersion();
    io.micrometer.core.instrument.Gauge.builder("stepwarden.build.info", () -> 1)
        .tags("version", v == null ? "development" : v, "java",
            System.getProperty("java.version", "?"))
        .description("The stepwarden build serving this page").register(r);
    return r;
  }

  /**
   * Starts serving {@code registry} on {@code host:port}; port 0 picks a free port.
   *
   * @throws IOException naming the address when the port is taken
   */
  public static MetricsServer start(PrometheusMeterRegistry registry, String host, int port)
      throws IOException {
    InetSocketAddress at = new InetSocketAddress(InetAddress.getByName(host), port);
    HttpServer s;
    try {
      s = HttpServer.create(at, 16);
    } catch (IOException e) {
      throw new IOException("cannot serve metrics on " + host + ":" + port + " (" + e.getMessage()
          + "); choose another --metrics-port", e);
    }
    ExecutorService ex = Executors.newSingleThreadExecutor(r -> {
      Thread t = new Thread(r, "stepwarden-metrics");
      t.setDaemon(true);
      return t;
    });
    MetricsServer m = new MetricsServer(s, ex, registry);
    s.createContext("/metrics", m::handle);
    s.setExecutor(ex);
    s.start();
    return m;
  }

  /** The port actually bound. */
  public int port() {
    return server.getAddress().getPort();
  }

  public PrometheusMeterRegistry registry() {
    return registry;
  }

  private void handle(HttpExchange x) throws IOException {
    try (x) {
      // the JDK's contexts match by prefix: /metricsXYZ and /metrics/a would be served too
      if (!x.getRequestURI().getPath().equals("/metrics")) {
        x.sendResponseHeaders(404, -1);
        return;
      }
      if (!x.getRequestMethod().equals("GET") && !x.getRequestMethod().equals("HEAD")) {
        x.getResponseHeaders().add("Allow", "GET, HEAD");
        x.sendResponseHeaders(405, -1);
        return;
      }
      byte[] body = registry.scrape().getBytes(StandardCharsets.UTF_8);
      x.getResponseHeaders().add("Content-Type", CONTENT_TYPE);
      if (x.getRequestMethod().equals("HEAD")) {
        x.sendResponseHeaders(200, -1);
        return;
      }
      x.sendResponseHeaders(200, body.length);
      try (OutputStream out = x.getResponseBody()) {
        out.write(body);
      }
    }
  }

  @Override
  public void close() {
    server.stop(0);
    executor.shutdownNow();
  }
}
