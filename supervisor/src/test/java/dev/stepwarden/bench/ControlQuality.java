package dev.stepwarden.bench;

import dev.stepwarden.rules.GuardFile;
import dev.stepwarden.rules.GuardFiles;
import dev.stepwarden.supervise.Supervisor;
import java.io.BufferedReader;
import java.io.IOException;
import java.io.OutputStream;
import java.io.PrintStream;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.ArrayList;
import java.util.LinkedHashMap;
import java.util.List;
import java.util.Locale;
import java.util.Map;
import java.util.Optional;
import java.util.concurrent.ExecutorService;
import java.util.concurrent.Executors;
import java.util.concurrent.Future;
import tools.jackson.databind.JsonNode;
import tools.jackson.databind.json.JsonMapper;

/**
 * Control-quality benchmark (not a unit test): does a supervised night end well from a bad first
 * guess of the learning rate? For each task and each starting rate (1e-3 to 3 in half-decade
 * steps) it runs real training (the demo trainer as a child JVM) through the real in-process
 * {@link Supervisor} three ways: unsupervised (the same file without guards, which is also the
 * fixed-rate grid), supervised (the benchmark's guard file) and supervised with the rate probe.
 * It then prints a Markdown table per task read from each run directory's metrics.jsonl and
 * audit.jsonl.
 *
 * <p>Tasks: the demo trainer's invented greenhouse data; the wine data (Forina et al., UCI Wine
 * recognition data) and the breast-cancer data (Wolberg, Street and Mangasarian 1995, UCI Breast
 * Cancer Wisconsin (Diagnostic)) as shipped by Debian's python3-sklearn, converted here to the
 * trainer's CSV format.
 *
 * <p>Run it with {@code supervisor/bench/control-quality.sh [--guards FILE] [--tasks demo,wine]}.
 */
public final class ControlQuality {
  static final double[] RATES = {1e-3, 3e-3, 1e-2, 3e-2, 0.1, 0.3, 1, 3};
  static final Path SKLEARN_DATA = Path.of("/usr/lib/python3/dist-packages/sklearn/datasets/data");
  private static final JsonMapper JSON = JsonMapper.builder().build();

  enum Mode { FIXED, GUARDED, PROBED }

  record Task(String name, String data, int epochs, int classes, String source) {}

  record Run(Task task, double rate, Mode mode) {}

  /** What one run came to, read from its run directory. */
  record Outcome(Run run, double best, double last, List<Double> validation, List<Long> stepsAt,
      int interventions, int rewinds, long probeSteps, Double probePick, String end) {}

  private ControlQuality() {}

  public static void main(String[] args) throws Exception {
    Path guards = Path.of("bench/control-quality.yaml");
    String tasks = "demo,wine,cancer";
    Path out = null;
    int parallel = 2;
    for (int i = 0; i < args.length; i++) {
      switch (args[i]) {
        case "--guards" -> guards = Path.of(args[++i]);
        case "--tasks" -> tasks = args[++i];
        case "--out" -> out = Path.of(args[++i]);
        case "--parallel" -> parallel = Integer.parseInt(args[++i]);
        default -> throw new IllegalArgumentException("unknown argument " + args[i]
            + "; use --guards FILE --tasks demo,wine,cancer --out DIR --parallel N");
      }
    }
    Path work = out != null ? Files.createDirectories(out)
        : Files.createTempDirectory("stepwarden-control-quality");
    GuardFile base = GuardFiles.load(guards);
    List<Task> list = new ArrayList<>();
    for (String t : tasks.split(",")) {
      list.add(task(t.strip(), work));
    }
    long started = System.nanoTime();
    ExecutorService pool = Executors.newFixedThreadPool(parallel);
    Map<Run, Future<Outcome>> futures = new LinkedHashMap<>();
    for (Task t : list) {
      for (Mode m : Mode.values()) {
        if (m == Mode.PROBED && base.probe().isEmpty()) {
          continue;
        }
        for (double r : RATES) {
          Run run = new Run(t, r, m);
          futures.put(run, pool.submit(() -> execute(base, run, work)));
        }
      }
    }
    List<Outcome> outcomes = new ArrayList<>();
    for (Future<Outcome> f : futures.values()) {
      outcomes.add(f.get());
    }
    pool.shutdown();
    double minutes = (System.nanoTime() - started) / 60e9;
    StringBuilder md = new StringBuilder();
    for (Task t : list) {
      md.append(table(t, outcomes.stream().filter(o -> o.run().task() == t).toList()));
    }
    md.append(String.format(Locale.ROOT, "%d runs in %.1f min (parallel %d); guard file %s;"
        + " run directories under %s%n", outcomes.size(), minutes, parallel, guards, work));
    System.out.print(md);
    Files.writeString(work.resolve("control-quality.md"), md);
  }

  static Task task(String name, Path work) throws IOException {
    return switch (name) {
      case "demo" -> new Task("demo", null, 30, 3,
          "invented greenhouse data of the demo trainer (3000 rows, 8 features, 3 classes)");
      case "wine" -> new Task("wine", sklearnCsv("wine_data.csv", work), 150, 3,
          "wine recognition data (Forina et al., UCI; 178 rows, 13 features, 3 classes)");
      case "cancer" -> new Task("cancer", sklearnCsv("breast_cancer.csv", work), 60, 2,
          "breast cancer Wisconsin diagnostic data (Wolberg, Street and Mangasarian 1995, UCI;"
              + " 569 rows, 30 features, 2 classes)");
      default -> throw new IllegalArgumentException("unknown task " + name
          + "; known: demo, wine, cancer");
    };
  }

  /**
   * sklearn's CSVs start with a line "rows,features,class names..." rather than a header; the
   * rows are features then an integer label. Writes the trainer's format: a header, then rows.
   */
  static String sklearnCsv(String file, Path work) throws IOException {
    Path in = SKLEARN_DATA.resolve(file);
    if (!Files.isRegularFile(in)) {
      throw new IOException(in + " not found; install Debian's python3-sklearn"
          + " (apt-get install -y python3-sklearn) or run with --tasks demo");
    }
    List<String> lines = Files.readAllLines(in, StandardCharsets.UTF_8);
    String[] head = lines.get(0).split(",");
    int features = Integer.parseInt(head[1].strip());
    StringBuilder b = new StringBuilder();
    for (int c = 0; c < features; c++) {
      b.append('x').append(c + 1).append(',');
    }
    b.append("label\n");
    for (String l : lines.subList(1, lines.size())) {
      if (l.isBlank()) {
        continue;
      }
      String[] cells = l.split(",");
      if (cells.length != features + 1) {
        throw new IOException(in + ": a row with " + cells.length + " cells, expected "
            + (features + 1));
      }
      String label = cells[features].strip();
      cells[features] = Long.toString(Math.round(Double.parseDouble(label)));
      b.append(String.join(",", cells)).append('\n');
    }
    Path out = work.resolve(file.replace(".csv", "") + "-trainer.csv");
    Files.writeString(out, b);
    return out.toString();
  }

  static Outcome execute(GuardFile base, Run run, Path work) throws Exception {
    String id = String.format(Locale.ROOT, "%s-%s-%g", run.task().name(),
        run.mode().name().toLowerCase(Locale.ROOT), run.rate());
    Path wd = Files.createDirectories(work.resolve("work").resolve(id));
    List<String> cmd = new ArrayList<>(List.of(
        Path.of(System.getProperty("java.home"), "bin", "java").toString(),
        "-XX:+UseSerialGC", "-XX:TieredStopAtLevel=4", "-Xmx128m",
        "-cp", absoluteClassPath(),
        "dev.stepwarden.demo.DemoTrainer", "--lr", "{learning_rate}", "--resume", "{resume_from}",
        "--skip-batches", "{skip_batches}", "--epochs", Integer.toString(run.task().epochs()),
        "--checkpoint-dir", "ckpt", "--step-delay-ms", "0"));
    if (run.task().data() != null) {
      cmd.add("--data");
      cmd.add(run.task().data());
    }
    GuardFile.Run r = base.run();
    GuardFile g = base.withRun(new GuardFile.Run(id, cmd, run.rate(), wd, r.env(),
        r.stopGrace()));
    if (run.mode() == Mode.FIXED) {
      g = g.withGuards(List.of()).withProbe(Optional.empty());
    } else if (run.mode() == Mode.GUARDED) {
      g = g.withProbe(Optional.empty());
    }
    PrintStream quiet = new PrintStream(OutputStream.nullOutputStream(), true,
        StandardCharsets.UTF_8);
    Supervisor.Options o = new Supervisor.Options(work.resolve("runs").resolve(id), true, null, quiet);
    Supervisor s = new Supervisor(g, o);
    Supervisor.Result res = s.run();
    return read(run, res.runDir(), res.outcome().name());
  }

  /** The trainer runs in its own working directory: the class path must not be relative. */
  static String absoluteClassPath() {
    List<String> parts = new ArrayList<>();
    for (String p : System.getProperty("java.class.path").split(java.io.File.pathSeparator)) {
      parts.add(Path.of(p).toAbsolutePath().toString());
    }
    return String.join(java.io.File.pathSeparator, parts);
  }

  static Outcome read(Run run, Path runDir, String end) throws IOException {
    List<Double> val = new ArrayList<>();
    List<Long> at = new ArrayList<>();
    long steps = 0;
    try (BufferedReader in = Files.newBufferedReader(runDir.resolve("metrics.jsonl"))) {
      String line;
      while ((line = in.readLine()) != null) {
        JsonNode n = JSON.readTree(line);
        if (n.has("train")) {
          steps++;
        }
        if (n.has("validation")) {
          JsonNode v = n.get("validation");
          val.add(v.isNumber() ? v.asDouble() : Double.NaN);
          at.add(steps);
        }
      }
    }
    int interventions = 0;
    int rewinds = 0;
    long probeSteps = 0;
    Double pick = null;
    for (String line : Files.readAllLines(runDir.resolve("audit.jsonl"))) {
      JsonNode n = JSON.readTree(line);
      String type = n.path("type").asString("");
      if (type.equals("decision")) {
        interventions++;
        if (n.path("action").toString().contains("rewind")) {
          rewinds++;
        }
      } else if (type.equals("probe")) {
        probeSteps = n.path("steps").asLong();
        pick = n.path("learning_rate").isNumber() ? n.path("learning_rate").asDouble() : null;
      }
    }
    double best = val.stream().filter(Double::isFinite).mapToDouble(Double::doubleValue).min()
        .orElse(Double.NaN);
    double last = val.isEmpty() ? Double.NaN : val.get(val.size() - 1);
    return new Outcome(run, best, last, val, at, interventions, rewinds, probeSteps, pick, end);
  }

  static boolean diverged(Outcome o) {
    return !Double.isFinite(o.last()) || o.last() >= 0.95 * Math.log(o.run().task().classes());
  }

  /** Steps spent (probe included, rewound steps included) until validation is within 5 %. */
  static String stepsTo(Outcome o, double target) {
    for (int i = 0; i < o.validation().size(); i++) {
      if (o.validation().get(i) <= 1.05 * target) {
        return Long.toString(o.stepsAt().get(i) + o.probeSteps());
      }
    }
    return "never";
  }

  static String table(Task t, List<Outcome> all) {
    Map<Mode, Map<Double, Outcome>> by = new LinkedHashMap<>();
    for (Outcome o : all) {
      by.computeIfAbsent(o.run().mode(), k -> new LinkedHashMap<>()).put(o.run().rate(), o);
    }
    Map<Double, Outcome> fixed = by.get(Mode.FIXED);
    Outcome bestFixed = fixed.values().stream().min((a, b) -> Double.compare(
        Double.isNaN(a.best()) ? 1e300 : a.best(), Double.isNaN(b.best()) ? 1e300 : b.best()))
        .orElseThrow();
    double ref = bestFixed.best();
    boolean probed = by.containsKey(Mode.PROBED);
    StringBuilder b = new StringBuilder();
    b.append(String.format(Locale.ROOT, "%n#### %s: %s, %d epochs%n%n", t.name(), t.source(),
        t.epochs()));
    b.append(String.format(Locale.ROOT, "Best fixed rate of the grid: %s (best validation loss"
        + " %.4f).%n%n", fmt(bestFixed.run().rate()), ref));
    b.append("| start rate | best val: unsupervised | supervised | ")
        .append(probed ? "probe | " : "")
        .append("steps to 5 %: unsup. / sup. ").append(probed ? "/ probe " : "")
        .append("| ended diverged ").append("| interventions | rewinds |")
        .append(probed ? " probe picked |" : "").append('\n');
    b.append("|---:|---:|---:|").append(probed ? "---:|" : "").append("---|---|---|---|")
        .append(probed ? "---:|" : "").append('\n');
    int goalMiss = 0;
    int supDiverged = 0;
    int probeMiss = 0;
    int probeDiverged = 0;
    for (double r : RATES) {
      Outcome f = fixed.get(r);
      Outcome s = by.get(Mode.GUARDED).get(r);
      Outcome p = probed ? by.get(Mode.PROBED).get(r) : null;
      goalMiss += s.best() <= 1.10 * ref ? 0 : 1;
      supDiverged += diverged(s) ? 1 : 0;
      if (p != null) {
        probeMiss += p.best() <= 1.10 * ref ? 0 : 1;
        probeDiverged += diverged(p) ? 1 : 0;
      }
      b.append("| ").append(fmt(r)).append(" | ").append(val(f.best(), ref)).append(" | ")
          .append(val(s.best(), ref)).append(" | ");
      if (p != null) {
        b.append(val(p.best(), ref)).append(" | ");
      }
      b.append(stepsTo(f, ref)).append(" / ").append(stepsTo(s, ref));
      if (p != null) {
        b.append(" / ").append(stepsTo(p, ref));
      }
      b.append(" | ").append(yes(f)).append(" / ").append(yes(s));
      if (p != null) {
        b.append(" / ").append(yes(p));
      }
      b.append(" | ").append(s.interventions()).append(p != null ? " / " + p.interventions()
          : "").append(" | ").append(s.rewinds()).append(p != null ? " / " + p.rewinds() : "")
          .append(" |");
      if (p != null) {
        b.append(' ').append(p.probePick() == null ? "-" : fmt(p.probePick())).append(" (")
            .append(p.probeSteps()).append(" steps) |");
      }
      b.append('\n');
    }
    Outcome sAtBest = by.get(Mode.GUARDED).get(bestFixed.run().rate());
    b.append(String.format(Locale.ROOT, "%nGoals (supervised): best val <= 1.10x from every"
        + " start: %s (%d of %d miss); no run ends diverged: %s (%d); started at the best fixed"
        + " rate: %.3fx, %d rewinds (goal <= 1.02x, none): %s.%n",
        goalMiss == 0 ? "met" : "missed", goalMiss, RATES.length,
        supDiverged == 0 ? "met" : "missed", supDiverged, sAtBest.best() / ref,
        sAtBest.rewinds(), sAtBest.best() <= 1.02 * ref && sAtBest.rewinds() == 0
            ? "met" : "missed"));
    if (probed) {
      Outcome pAtBest = by.get(Mode.PROBED).get(bestFixed.run().rate());
      b.append(String.format(Locale.ROOT, "With the probe: <= 1.10x: %s (%d miss); diverged:"
          + " %d; at the best fixed rate: %.3fx, %d rewinds.%n",
          probeMiss == 0 ? "met" : "missed", probeMiss, probeDiverged, pAtBest.best() / ref,
          pAtBest.rewinds()));
    }
    return b.toString();
  }

  static String yes(Outcome o) {
    return diverged(o) ? "**yes**" : "no";
  }

  static String val(double v, double ref) {
    return Double.isNaN(v) ? "NaN" : String.format(Locale.ROOT, "%.4f (%.2fx)", v, v / ref);
  }

  static String fmt(double r) {
    return String.format(Locale.ROOT, "%.3g", r);
  }
}
