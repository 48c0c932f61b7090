package dev.stepwarden.bench;

import dev.stepwarden.audit.AuditReader;
import dev.stepwarden.rules.GuardFile;
import dev.stepwarden.rules.GuardFiles;
import dev.stepwarden.supervise.RunOptions;
import dev.stepwarden.supervise.Supervisor;
import java.io.IOException;
import java.io.OutputStream;
import java.io.PrintStream;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.security.MessageDigest;
import java.security.NoSuchAlgorithmException;
import java.util.ArrayList;
import java.util.Arrays;
import java.util.HexFormat;
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
 * Control-quality benchmark (not a unit test): does a supervised night end well from any
 * starting rate, measured on held-out data rather than on the noisy validation minimum?
 *
 * <p>For each task, seed and starting rate (1e-3 to 3 in half-decade steps) it trains a small
 * PyTorch classifier ({@code bench/control_quality_trainer.py}; digits and breast-cancer data as
 * Debian's python3-sklearn ships them) three ways, each through the real in-process
 * {@link Supervisor}: at the fixed rate (the guard file without guards or probe: the grid),
 * with PyTorch's own {@code ReduceLROnPlateau} inside the trainer (no guards), and supervised by
 * the guard file under test. Every trainer follows the README's control-file protocol through
 * the shipped Python helper; the task {@code cancer-mlp} is steered by restart.
 *
 * <p>Score of a night: the test-split loss of the checkpoint stepwarden names for use (the
 * {@code best_checkpoint} of the audit log's {@code run-end} record, found by its SHA-256 in the
 * trainer's side file) divided by the same seed's grid best, where each fixed rate is scored by
 * its best-validation checkpoint on the test split. Compute: the training steps all launches ran
 * (probe, branches and rewound steps included) in units of one plain run's steps.
 *
 * <p>Run it with {@code supervisor/bench/control-quality.sh [--guards FILE] [--tasks ...]}.
 */
public final class ControlQuality {
  static final double[] GRID = {1e-3, 3e-3, 1e-2, 3e-2, 0.1, 0.3, 1, 3};
  /** The starting rates of this invocation (the grid unless --rates narrows it for a try). */
  static double[] RATES = GRID;
  static final String PYTHON = "/usr/bin/python3";
  private static final JsonMapper JSON = JsonMapper.builder().build();
  private static final String STAMP = java.time.LocalDateTime.now()
      .format(java.time.format.DateTimeFormatter.ofPattern("yyyyMMdd-HHmmss"));

  enum Mode { FIXED, PLATEAU, SUPERVISED }

  /**
   * One benchmark task.
   *
   * @param restart steered by restart (the trainer reads the control file once per launch)
   */
  record Task(String name, int epochs, int classes, boolean restart, String source) {}

  record Run(Task task, int seed, double rate, Mode mode) {
    String id() {
      return String.format(Locale.ROOT, "%s-s%d-%s-%g", task.name(), seed,
          mode.name().toLowerCase(Locale.ROOT), rate);
    }
  }

  /**
   * What one night came to.
   *
   * @param test test-split loss of the checkpoint the night is scored by (NaN: none named)
   * @param cost training steps run, in plain runs
   * @param lastVal the last validation loss printed
   */
  record Outcome(Run run, double test, double bestVal, double lastVal, double cost,
      int interventions, int rewinds, Double probePick, String end) {
    boolean diverged() {
      return !Double.isFinite(lastVal) || lastVal >= 0.95 * Math.log(run.task().classes())
          || !Double.isFinite(test);
    }
  }

  private ControlQuality() {}

  public static void main(String[] args) throws Exception {
    Path guards = Path.of("../rules/overnight.yaml");
    String tasks = "digits-mlp,cancer-mlp,digits-cnn";
    int seeds = 3;
    Path out = null;
    int parallel = 2;
    for (int i = 0; i < args.length; i++) {
      switch (args[i]) {
        case "--guards" -> guards = Path.of(args[++i]);
        case "--tasks" -> tasks = args[++i];
        case "--seeds" -> seeds = Integer.parseInt(args[++i]);
        case "--out" -> out = Path.of(args[++i]);
        case "--parallel" -> parallel = Integer.parseInt(args[++i]);
        case "--rates" -> RATES = Arrays.stream(args[++i].split(","))
            .mapToDouble(Double::parseDouble).toArray();
        default -> throw new IllegalArgumentException("unknown argument " + args[i]
            + "; use --guards FILE --tasks digits-mlp,cancer-mlp,digits-cnn --seeds N"
            + " --out DIR --parallel N [--rates 0.01,0.1 for a quick try]");
      }
    }
    Path work = (out != null ? Files.createDirectories(out)
        : Files.createTempDirectory("stepwarden-control-quality")).toAbsolutePath();
    GuardFile base = GuardFiles.load(guards);
    Path trainer = Path.of("bench/control_quality_trainer.py").toAbsolutePath();
    Path helper = Path.of("src/main/resources/dev/stepwarden/control").toAbsolutePath();
    Path data = work.resolve("data");
    prepare(trainer, data);
    List<Task> list = Arrays.stream(tasks.split(",")).map(t -> task(t.strip())).toList();
    long started = System.nanoTime();
    ExecutorService pool = Executors.newFixedThreadPool(parallel);
    List<Future<Outcome>> futures = new ArrayList<>();
    for (Task t : list) {
      for (int s = 1; s <= seeds; s++) {
        for (Mode m : Mode.values()) {
          for (double r : RATES) {
            Run run = new Run(t, s, r, m);
            futures.add(pool.submit(() -> execute(base, run, work, trainer, helper, data)));
          }
        }
      }
    }
    List<Outcome> outcomes = new ArrayList<>();
    for (Future<Outcome> f : futures) {
      outcomes.add(f.get());
    }
    pool.shutdown();
    double minutes = (System.nanoTime() - started) / 60e9;
    StringBuilder md = new StringBuilder();
    List<Summary> sums = new ArrayList<>();
    for (Task t : list) {
      Summary sum = Summary.of(t, seeds, outcomes.stream().filter(o -> o.run().task() == t)
          .toList());
      sums.add(sum);
      md.append(sum.table());
    }
    md.append(Summary.overview(sums));
    md.append(String.format(Locale.ROOT, "%n%d nights in %.1f min (parallel %d); guard file %s;"
        + " run directories under %s%n", outcomes.size(), minutes, parallel, guards, work));
    System.out.print(md);
    Files.writeString(work.resolve("control-quality.md"), md);
  }

  static Task task(String name) {
    return switch (name) {
      case "digits-mlp" -> new Task(name, 20, 10, false, "handwritten digits (UCI optical"
          + " recognition of handwritten digits, 1797 rows of 8x8 pixels, 10 classes), 64-64-10"
          + " ReLU network, plain SGD, batch 32, control-file steering");
      case "cancer-mlp" -> new Task(name, 20, 2, true, "breast cancer Wisconsin diagnostic data"
          + " (Wolberg, Street and Mangasarian 1995, UCI; 569 rows, 30 features, 2 classes),"
          + " 30-16-2 ReLU network, plain SGD, batch 16, restart steering (no probe: it needs"
          + " the control file)");
      case "digits-cnn" -> new Task(name, 15, 10, false, "the same digits as 1x8x8 images, two"
          + " 3x3 convolutions, SGD with momentum 0.9, batch 32, control-file steering");
      default -> throw new IllegalArgumentException("unknown task " + name
          + "; known: digits-mlp, cancer-mlp, digits-cnn");
    };
  }

  /** Converts sklearn's shipped CSVs to the trainer's arrays once (sklearn's import is slow). */
  static void prepare(Path trainer, Path data) throws IOException, InterruptedException {
    Process p = new ProcessBuilder(PYTHON, trainer.toString(), "--prepare", data.toString())
        .inheritIO().start();
    if (p.waitFor() != 0) {
      throw new IOException("preparing the data failed; the benchmark needs Debian's"
          + " python3-torch and python3-sklearn (apt-get install -y python3-torch python3-sklearn)");
    }
  }

  static Outcome execute(GuardFile base, Run run, Path work, Path trainer, Path helper,
      Path data) throws Exception {
    // The grid and the in-process scheduler do not depend on the guard file: a later invocation
    // with the same --out reuses their finished nights and runs only the supervised ones again.
    boolean plain = run.mode() != Mode.SUPERVISED;
    String dir = plain ? run.id() : run.id() + "-" + STAMP;
    Path runDir = work.resolve("runs").resolve(dir);
    Path wd = work.resolve("work").resolve(dir);
    if (plain && finished(runDir)) {
      return read(run, runDir, wd, "reused");
    }
    deleteTree(runDir);
    deleteTree(wd);
    Files.createDirectories(wd);
    Task t = run.task();
    List<String> cmd = new ArrayList<>(List.of(PYTHON, trainer.toString(), "--task", t.name(),
        "--data", data.toString(), "--seed", Integer.toString(run.seed()),
        "--lr", "{learning_rate}", "--resume", "{resume_from}",
        "--epochs", Integer.toString(t.epochs()), "--steer", t.restart() ? "launch" : "poll"));
    if (run.mode() == Mode.PLATEAU) {
      cmd.add("--plateau");
    }
    Map<String, String> env = new LinkedHashMap<>(base.run().env());
    env.put("PYTHONPATH", helper.toString());
    env.put("OMP_NUM_THREADS", "1");
    GuardFile.Run r = base.run();
    GuardFile.Steer steer = t.restart()
        ? new GuardFile.Steer(GuardFile.Steer.Method.RESTART, base.steer().confirmWithin(), false)
        : base.steer();
    GuardFile.Limits l = base.limits();
    // A start outside limits.learning_rate is refused by the loader, whose message tells the
    // user to widen the limits: the benchmark does that for its starts above the preset's max.
    GuardFile.Limits limits = new GuardFile.Limits(Math.min(l.minRate(), run.rate()),
        Math.max(l.maxRate(), run.rate()), l.rewinds(), l.crashRestarts(), l.silence(),
        l.crashBackoff(), l.firstMetric());
    int keep = base.checkpoints().map(GuardFile.Checkpoints::keep).orElse(5);
    GuardFile g = new GuardFile(base.source(),
        new GuardFile.Run(run.id(), cmd, run.rate(), wd, env, r.stopGrace()), base.read(), steer,
        Optional.of(new GuardFile.Checkpoints("ckpt/step-*.pt", keep)),
        plain ? List.of() : base.guards(), limits,
        plain || t.restart() ? Optional.empty() : base.probe());
    PrintStream quiet = new PrintStream(OutputStream.nullOutputStream(), true,
        StandardCharsets.UTF_8);
    RunOptions o = new RunOptions(runDir, true, null, quiet);
    Supervisor.Result res = new Supervisor(g, o).run();
    return read(run, res.runDir(), wd, res.outcome().name());
  }

  static boolean finished(Path runDir) throws IOException {
    Path audit = runDir.resolve("audit.jsonl");
    return Files.isRegularFile(audit) && AuditReader.read(audit).records().stream()
        .anyMatch(r -> "run-end".equals(r.get("type")));
  }

  /** Removes a half-finished night of an earlier invocation (the benchmark's own directories). */
  static void deleteTree(Path p) throws IOException {
    if (!Files.exists(p)) {
      return;
    }
    try (var walk = Files.walk(p)) {
      for (Path q : walk.sorted(java.util.Comparator.reverseOrder()).toList()) {
        Files.delete(q);
      }
    }
  }

  /** One checkpoint as the trainer recorded it in its side file. */
  record Written(String sha256, long step, double val, double test) {}

  static Outcome read(Run run, Path runDir, Path wd, String end) throws IOException {
    List<Written> written = new ArrayList<>();
    for (String line : Files.readAllLines(wd.resolve("bench-checkpoints.jsonl"))) {
      JsonNode n = JSON.readTree(line);
      written.add(new Written(n.path("sha256").asString(), n.path("step").asLong(),
          n.path("val_loss").isNumber() ? n.path("val_loss").asDouble() : Double.NaN,
          n.path("test_loss").isNumber() ? n.path("test_loss").asDouble() : Double.NaN));
    }
    long steps = 0;
    long perRun = 0;
    for (String line : Files.readAllLines(wd.resolve("bench-steps.jsonl"))) {
      JsonNode n = JSON.readTree(line);
      steps += n.path("steps").asLong();
      perRun = n.path("steps_per_epoch").asLong() * run.task().epochs();
    }
    int interventions = 0;
    int rewinds = 0;
    Double pick = null;
    String named = null;
    for (Map<String, Object> rec : AuditReader.read(runDir.resolve("audit.jsonl")).records()) {
      Object type = rec.get("type");
      if ("decision".equals(type)) {
        interventions++;
        if (String.valueOf(rec.get("action")).contains("rewind")) {
          rewinds++;
        }
      } else if ("probe".equals(type) && rec.get("learning_rate") instanceof Number n) {
        pick = n.doubleValue();
      } else if ("run-end".equals(type) && rec.get("best_checkpoint") instanceof String s) {
        named = s;
      }
    }
    double bestVal = written.stream().mapToDouble(Written::val).filter(Double::isFinite).min()
        .orElse(Double.NaN);
    double lastVal = written.isEmpty() ? Double.NaN : written.get(written.size() - 1).val();
    double test;
    if (run.mode() == Mode.SUPERVISED) {
      test = Double.NaN;
      if (named != null) {
        Path p = Path.of(named);
        String sha = sha256(p.isAbsolute() ? p : runDir.resolve(p));
        test = written.stream().filter(w -> w.sha256().equals(sha)).findFirst()
            .map(Written::test).orElse(Double.NaN);
        if (Double.isNaN(test)) {
          System.err.println("control-quality: the named checkpoint " + p + " is none the"
              + " trainer recorded in " + wd + "; the night is scored as naming none");
        }
      }
    } else {
      // each fixed rate (and the in-process scheduler) by its best-validation checkpoint
      test = written.stream().filter(w -> Double.isFinite(w.val()))
          .min((a, b) -> Double.compare(a.val(), b.val())).map(Written::test)
          .orElse(Double.NaN);
    }
    return new Outcome(run, test, bestVal, lastVal, perRun == 0 ? Double.NaN
        : (double) steps / perRun, interventions, rewinds, pick, end);
  }

  static String sha256(Path p) throws IOException {
    try {
      return HexFormat.of().formatHex(MessageDigest.getInstance("SHA-256")
          .digest(Files.readAllBytes(p)));
    } catch (NoSuchAlgorithmException e) {
      throw new IllegalStateException(e);
    }
  }
}
