package dev.stepwarden.metrics;

import java.util.Map;
import java.util.concurrent.TimeUnit;
import org.openjdk.jmh.annotations.Benchmark;
import org.openjdk.jmh.annotations.BenchmarkMode;
import org.openjdk.jmh.annotations.Fork;
import org.openjdk.jmh.annotations.Measurement;
import org.openjdk.jmh.annotations.Mode;
import org.openjdk.jmh.annotations.OutputTimeUnit;
import org.openjdk.jmh.annotations.Scope;
import org.openjdk.jmh.annotations.Setup;
import org.openjdk.jmh.annotations.State;
import org.openjdk.jmh.annotations.Warmup;
import org.openjdk.jmh.infra.Blackhole;

/** Lines per second of each reader, and of the whole intake, on typical trainer lines. */
@State(Scope.Thread)
@BenchmarkMode(Mode.Throughput)
@OutputTimeUnit(TimeUnit.SECONDS)
@Warmup(iterations = 3, time = 1)
@Measurement(iterations = 5, time = 1)
@Fork(1)
public class ParserBench {
  static final String[] SHORT = new String[64];
  static final String[] REPR = new String[64];

  static {
    java.util.Random r = new java.util.Random(1);
    for (int i = 0; i < 64; i++) {
      double loss = 2.0 * Math.exp(-i / 20.0) + 0.01 * r.nextGaussian();
      SHORT[i] = String.format(java.util.Locale.ROOT,
          "{\"step\": %d, \"epoch\": %d, \"loss\": %.4f, \"lr\": 0.001}", 1000 + i, i / 10, loss);
      REPR[i] = "{\"step\": " + (1000 + i) + ", \"epoch\": " + (i / 10) + ", \"loss\": "
          + NumberExactnessTest.pythonRepr(loss) + ", \"lr\": 0.001}";
    }
  }

  /** A calm stretch of training (no guard fires): 4096 Python-printed lines, 17-digit losses. */
  static final byte[][] CALM = new byte[4096][];

  static {
    java.util.Random r = new java.util.Random(2);
    for (int i = 0; i < CALM.length; i++) {
      double loss = 0.5 + 0.01 * r.nextDouble();
      CALM[i] = ("{\"step\": " + (100_000 + i) + ", \"epoch\": 3, \"loss\": "
          + NumberExactnessTest.pythonRepr(loss) + ", \"lr\": 0.001}")
          .getBytes(java.nio.charset.StandardCharsets.UTF_8);
    }
  }

  /**
   * The same calm stretch as a trainer printing more than the guards read: eight top-level keys
   * and a nested one, of which the guard file wants two (step and loss).
   */
  static final byte[][] WIDE = new byte[4096][];

  static {
    java.util.Random r = new java.util.Random(3);
    for (int i = 0; i < WIDE.length; i++) {
      double loss = 0.5 + 0.01 * r.nextDouble();
      WIDE[i] = ("{\"step\": " + (100_000 + i) + ", \"epoch\": 3, \"loss\": "
          + NumberExactnessTest.pythonRepr(loss) + ", \"lr\": 0.001, \"grad_norm\": "
          + NumberExactnessTest.pythonRepr(1 + r.nextDouble()) + ", \"tokens_per_s\": "
          + (40_000 + r.nextInt(1000)) + ".5, \"mem_gb\": 13.25, \"phase\": \"train\","
          + " \"timing\": {\"data_ms\": 1.5, \"step_ms\": " + (80 + r.nextInt(9)) + "}}")
          .getBytes(java.nio.charset.StandardCharsets.UTF_8);
    }
  }

  private int calm;
  private int wide;

  private final JsonLineParser fast = new JsonLineParser();
  private final JacksonJsonLineParser jackson = new JacksonJsonLineParser();
  private final PairsLineParser pairs = new PairsLineParser();
  private MetricsIntake intake;
  private MetricsIntake guarded;
  private dev.stepwarden.engine.GuardEngine engine;
  private int i;
  private String[] pairLines;

  @Setup
  public void setup() throws Exception {
    intake = new MetricsIntake(new ReadPlan(ReadPlan.Source.STDOUT, null, ReadPlan.Format.JSON,
        null, "step", "epoch", "lr", Map.of("train", "loss")));
    dev.stepwarden.rules.GuardFile rules = dev.stepwarden.rules.GuardFiles.parse(String.join("\n",
        "run: { command: [cat], learning_rate: 0.001 }",
        "read: { from: stdout, step: step, series: { train: loss } }",
        "guards:",
        "  - name: blow-up",
        "    when: { rises: { series: train, above_level: 3.0, samples: 3 } }",
        "    do: { scale: 0.5 }",
        "  - name: nan",
        "    when: { breaks: { series: train } }",
        "    do: stop",
        "").getBytes(java.nio.charset.StandardCharsets.UTF_8), java.nio.file.Path.of("bench.yaml"));
    guarded = new MetricsIntake(rules.read());
    engine = new dev.stepwarden.engine.GuardEngine(rules);
    pairLines = new String[64];
    for (int k = 0; k < 64; k++) {
      pairLines[k] = SHORT[k].replaceAll("[{}\"]", "").replace(": ", "=").replace(",", "");
    }
  }

  private int next() {
    return i = (i + 1) & 63;
  }

  @Benchmark
  public void jsonShortNumbers(Blackhole bh) {
    fast.parse(SHORT[next()], (k, v) -> bh.consume(v));
  }

  @Benchmark
  public void jsonReprNumbers(Blackhole bh) {
    fast.parse(REPR[next()], (k, v) -> bh.consume(v));
  }

  @Benchmark
  public void jacksonShortNumbers(Blackhole bh) {
    jackson.parse(SHORT[next()], (k, v) -> bh.consume(v));
  }

  @Benchmark
  public void pairsShortNumbers(Blackhole bh) {
    pairs.parse(pairLines[next()], (k, v) -> bh.consume(v));
  }

  @Benchmark
  public Object intakeJsonShort() {
    return intake.accept(SHORT[next()], 0L);
  }

  @Benchmark
  public Object intakeJsonRepr() {
    return intake.accept(REPR[next()], 0L);
  }

  /**
   * The one-core figure: a Python-printed JSON line (17-digit loss) read from the pump's
   * bytes, made a sample and fed to the guard engine (a spike guard and a non-finite guard).
   */
  @Benchmark
  public Object intakeAndGuardsFromBytes() {
    byte[] b = CALM[calm = (calm + 1) & 4095];
    MetricsIntake.Reading r = guarded.accept(b, 0, b.length, 0L, false);
    return engine.onSample(r.sample());
  }

  /** As {@link #intakeAndGuardsFromBytes} on a wider line whose other keys nobody reads. */
  @Benchmark
  public Object intakeAndGuardsWideLine() {
    byte[] b = WIDE[wide = (wide + 1) & 4095];
    MetricsIntake.Reading r = guarded.accept(b, 0, b.length, 0L, false);
    return engine.onSample(r.sample());
  }
}
