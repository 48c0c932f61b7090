package dev.stepwarden.metrics;

import dev.stepwarden.process.LaunchSpec;
import dev.stepwarden.process.LineBatch;
import dev.stepwarden.process.LineBatchListener;
import dev.stepwarden.process.TrainerProcess;
import dev.stepwarden.process.TrainerStream;
import dev.stepwarden.engine.GuardEngine;
import dev.stepwarden.rules.GuardFile;
import dev.stepwarden.rules.GuardFiles;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.Locale;

/**
 * Whole-pipeline flood harness (not a unit test): launches {@code cat FILE...} through the
 * process layer (pump, stdout log, line splitting) and feeds every line to a
 * {@link MetricsSources} intake and a {@link GuardEngine}, under one lock as the supervisor does,
 * plus a {@link SeriesHistory}. Prints lines per second and the peak resident memory.
 * Run by {@code supervisor/bench/flood.sh}; usage: {@code IntakeFlood FILE [FILE...]}.
 */
public final class IntakeFlood {
  private IntakeFlood() {}

  public static void main(String[] args) throws Exception {
    if (args.length == 0) {
      System.err.println("usage: IntakeFlood FILE [FILE...]");
      System.exit(2);
    }
    Path tmp = Files.createTempDirectory("stepwarden-flood");
    GuardFile rules = GuardFiles.parse(String.join("\n",
        "run: { command: [cat], learning_rate: 0.001 }",
        "read: { from: stdout, series: { train: loss } }",
        "guards:",
        "  - name: blow-up",
        "    when: { rises: { series: train, above_level: 3.0, samples: 3 } }",
        "    do: { scale: 0.5 }",
        "  - name: nan",
        "    when: { breaks: { series: train } }",
        "    do: stop",
        "").getBytes(StandardCharsets.UTF_8), Path.of("flood.yaml"));
    MetricsSources sources = new MetricsSources(rules.read());
    GuardEngine engine = new GuardEngine(rules);
    SeriesHistory history = new SeriesHistory(1024);
    Object lock = new Object();
    long[] decisions = new long[1];
    String[] argv = new String[args.length + 1];
    argv[0] = "cat";
    System.arraycopy(args, 0, argv, 1, args.length);
    LaunchSpec spec = LaunchSpec.builder().command(argv).workingDirectory(Path.of(""))
        .stdoutLog(tmp.resolve("stdout.log")).stderrLog(tmp.resolve("stderr.log")).echo(false)
        .build();
    long t0 = System.nanoTime();
    // One lock acquisition per pump read, lines parsed from the pump's bytes, as the supervisor.
    TrainerProcess p = TrainerProcess.start(spec, new LineBatchListener() {
      @Override
      public void onLines(TrainerStream stream, LineBatch lines) {
        synchronized (lock) {
          for (int k = 0; k < lines.size(); k++) {
            take(sources.accept(0, lines.bytes(), lines.offset(k), lines.length(k), 0L, false));
          }
        }
      }

      @Override
      public void onLine(TrainerStream stream, String line) {
        synchronized (lock) {
          take(sources.accept(0, line, 0L, false));
        }
      }

      private void take(MetricsIntake.Reading r) {
        if (r != null && r.sample() != null) {
          Sample s = r.sample();
          Double v = s.value("train");
          if (v != null) {
            history.add(s.step(), v);
          }
          if (engine.onSample(s).isPresent()) {
            decisions[0]++;
          }
        }
      }
    });
    int code = p.waitFor();
    double secs = (System.nanoTime() - t0) / 1e9;
    long lines = sources.lines();
    System.out.printf(Locale.ROOT, "lines=%d metric_lines=%d ignored=%d decisions=%d exit=%d%n",
        lines, sources.metricLines(), sources.ignoredLines(), decisions[0], code);
    System.out.printf(Locale.ROOT, "seconds=%.3f lines_per_second=%.0f%n", secs, lines / secs);
    System.out.printf(Locale.ROOT, "history_buckets=%d peak_rss_mb=%.1f%n",
        history.buckets().size(), peakRssKb() / 1024.0);
    Files.deleteIfExists(tmp.resolve("stdout.log"));
    Files.deleteIfExists(tmp.resolve("stderr.log"));
    Files.deleteIfExists(tmp);
  }

  private static long peakRssKb() throws java.io.IOException {
    for (String l : Files.readAllLines(Path.of("/proc/self/status"))) {
      if (l.startsWith("VmHWM:")) {
        return Long.parseLong(l.replaceAll("[^0-9]", ""));
      }
    }
    return -1;
  }
}
