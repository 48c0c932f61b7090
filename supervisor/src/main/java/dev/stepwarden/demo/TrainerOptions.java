package dev.stepwarden.demo;

import java.util.ArrayList;
import java.util.HashSet;
import java.util.List;
import java.util.Locale;
import java.util.Set;

/** The demo trainer's command line, parsed by hand. Each option takes {@code --name VALUE} or {@code --name=VALUE}. */
final class TrainerOptions {
  /** A command-line mistake; the message names the option and what it expects. */
  static final class UsageException extends Exception {
    UsageException(String message) {
      super(message);
    }
  }

  static final double DEFAULT_LR = 0.1;
  static final double[] DEFAULT_SWEEP_RATES = {0.001, 0.01, 0.03, 0.1, 0.3, 1, 3, 10};

  static final String USAGE =
      String.join(
          "\n",
          "usage: java -cp stepwarden.jar dev.stepwarden.demo.DemoTrainer [options]",
          "",
          "Trains a small tanh network with mini-batch SGD on invented greenhouse data (or --data),",
          "printing one JSON line per step and per evaluation on stdout.",
          "",
          "  --lr X               learning rate (default " + DEFAULT_LR + "; on --resume: the checkpoint's)",
          "  --epochs N           train until N epochs are done in total (default 30)",
          "  --batch B            rows per step (default 32)",
          "  --seed S             seed of data, split, initial weights and batch order (default 1)",
          "  --samples N          rows of built-in data (default 3000)",
          "  --hidden H           units per hidden layer (default 24)",
          "  --layers L           hidden layers, 0 to 2 (default 2; 0 is softmax regression)",
          "  --momentum M         heavy-ball momentum in [0, 1) (default 0: plain SGD)",
          "  --eval-every K       evaluate every K steps (default: at the end of each epoch)",
          "  --checkpoint-dir DIR where last.ckpt and step-NNNNNN.ckpt go (default ckpt)",
          "  --resume PATH        continue from a checkpoint (\"\" or none: fresh start)",
          "  --skip-batches N     skip N batches before the first step (after a spike)",
          "  --step-delay-ms D    sleep D ms per step, to make a demo watchable (default 0)",
          "  --data FILE          CSV with a header; last column is the integer class label",
          "  --sweep              print the best validation loss per rate and exit",
          "  --sweep-rates LIST   rates for --sweep, comma-separated (default 0.001,...,10)",
          "  --help               this text",
          "",
          "Environment: STEPWARDEN_CONTROL names a JSON control file polled before each step.",
          "Exit codes: 0 done, 1 I/O failure, 2 usage error.");

  double lr = DEFAULT_LR;
  int epochs = 30;
  int batch = 32;
  long seed = 1;
  int samples = 3000;
  int hidden = 24;
  int layers = 2;
  double momentum = 0.0;
  long evalEvery = 0; // 0: once per epoch
  String checkpointDir = "ckpt";
  String resume = null;
  long skipBatches = 0;
  long stepDelayMs = 0;
  String data = null;
  boolean sweep = false;
  double[] sweepRates = DEFAULT_SWEEP_RATES.clone();
  boolean help = false;

  /** The options the user spelled out (by long name without dashes), as opposed to defaults. */
  final Set<String> given = new HashSet<>();

  static TrainerOptions parse(String[] args) throws UsageException {
    TrainerOptions o = new TrainerOptions();
    for (int i = 0; i < args.length; i++) {
      String arg = args[i];
      if (!arg.startsWith("--")) {
        throw new UsageException("unexpected argument '" + arg + "'; options start with --");
      }
      String name = arg.substring(2);
      String value = null;
      int eq = name.indexOf('=');
      if (eq >= 0) {
        value = name.substring(eq + 1);
        name = name.substring(0, eq);
      }
      if (name.equals("help") || name.equals("sweep")) {
        if (value != null) {
          throw new UsageException("--" + name + " takes no value");
        }
        if (name.equals("help")) {
          o.help = true;
        } else {
          o.sweep = true;
        }
        o.given.add(name);
        continue;
      }
      if (!KNOWN.contains(name)) {
        throw new UsageException("unknown option --" + name + " (see --help)");
      }
      if (value == null) {
        if (i + 1 >= args.length) {
          throw new UsageException("--" + name + " needs a value");
        }
        value = args[++i];
      }
      if (!o.given.add(name)) {
        throw new UsageException("--" + name + " is given twice");
      }
      o.set(name, value);
    }
    return o;
  }

  private static final List<String> KNOWN =
      List.of(
          "lr", "epochs", "batch", "seed", "samples", "hidden", "layers", "momentum", "eval-every",
          "checkpoint-dir", "resume", "skip-batches", "step-delay-ms", "data", "sweep-rates");

  private void set(String name, String v) throws UsageException {
    switch (name) {
      case "lr" -> lr = positive(name, v);
      case "epochs" -> epochs = (int) whole(name, v, 1, Integer.MAX_VALUE);
      case "batch" -> batch = (int) whole(name, v, 1, 1 << 20);
      case "seed" -> seed = whole(name, v, Long.MIN_VALUE, Long.MAX_VALUE);
      case "samples" -> samples = (int) whole(name, v, 10, 10_000_000);
      case "hidden" -> hidden = (int) whole(name, v, 1, 4096);
      case "layers" -> layers = (int) whole(name, v, 0, 2);
      case "momentum" -> {
        momentum = number(name, v);
        if (!(momentum >= 0 && momentum < 1)) {
          throw new UsageException("--momentum expects a number in [0, 1), got '" + v + "'");
        }
      }
      case "eval-every" -> evalEvery = whole(name, v, 1, Long.MAX_VALUE);
      case "checkpoint-dir" -> {
        if (v.isBlank()) {
          throw new UsageException("--checkpoint-dir needs a directory name, got an empty string");
        }
        checkpointDir = v;
      }
      case "resume" -> resume = v.isBlank() || v.strip().equalsIgnoreCase("none") ? null : v;
      case "skip-batches" -> skipBatches = whole(name, v, 0, Long.MAX_VALUE);
      case "step-delay-ms" -> stepDelayMs = whole(name, v, 0, 3_600_000);
      case "data" -> {
        if (v.isBlank()) {
          throw new UsageException("--data needs a CSV file name, got an empty string");
        }
        data = v;
      }
      case "sweep-rates" -> {
        List<Double> rates = new ArrayList<>();
        for (String part : v.split(",", -1)) {
          rates.add(positive(name, part.strip()));
        }
        sweepRates = rates.stream().mapToDouble(Double::doubleValue).toArray();
      }
      default -> throw new AssertionError(name);
    }
  }

  private static double number(String name, String v) throws UsageException {
    try {
      return Double.parseDouble(v.strip());
    } catch (NumberFormatException e) {
      throw new UsageException("--" + name + " expects a number, got '" + v + "'");
    }
  }

  private static double positive(String name, String v) throws UsageException {
    double d = number(name, v);
    if (!(d > 0) || !Double.isFinite(d)) {
      throw new UsageException("--" + name + " expects a positive finite number, got '" + v + "'");
    }
    return d;
  }

  private static long whole(String name, String v, long min, long max) throws UsageException {
    long n;
    try {
      n = Long.parseLong(v.strip());
    } catch (NumberFormatException e) {
      throw new UsageException("--" + name + " expects a whole number, got '" + v + "'");
    }
    if (n < min || n > max) {
      String range =
          max == Long.MAX_VALUE || max == Integer.MAX_VALUE
              ? "at least " + min
              : String.format(Locale.ROOT, "between %d and %d", min, max);
      throw new UsageException("--" + name + " must be " + range + ", got " + n);
    }
    return n;
  }
}
