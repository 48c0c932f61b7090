package dev.stepwarden.detectors;

import dev.stepwarden.stats.Prechelt;
import java.util.ArrayList;
import java.util.Arrays;
import java.util.List;
import java.util.Locale;
import java.util.Optional;
import java.util.Random;
import java.util.function.Supplier;

/**
 * Measured behaviour of the detectors with their proposed defaults, on synthetic series of our
 * own (seeded, so every run prints the same table).
 *
 * <p>False alarms: long, steadily descending noisy series loss(t) = a + b exp(-t / tau) times
 * log-normal noise exp(sigma e) (e standard normal, or Student t with 3 degrees of freedom for the
 * "heavy" rows: occasional very bad batches), and flat noise. A firing is spurious when the
 * noise-free curve clearly does not meet the detector's condition where it fired; detectors are
 * reset after each firing, as the engine does after acting. Rates are per 1000 evaluations judged.
 *
 * <p>Detection delays: series with a known blow-up onset (delay in samples, the onset sample
 * counting as 1), a known plateau onset (delay in evaluations after the plateau became visible:
 * {@code over} evaluations after the last improving one, the first moment any rule of this shape
 * could know), and a few others for information.
 *
 * <p>Run the full measurement (about a minute on one core) from the repository root:
 *
 * <pre>
 *   mvn -B -q -pl supervisor test-compile dependency:build-classpath \
 *       -Dmdep.includeScope=test -Dmdep.outputFile=target/test.cp
 *   java -cp supervisor/target/test-classes:supervisor/target/classes:$(cat supervisor/target/test.cp) \
 *       dev.stepwarden.detectors.DetectorTrials            # add "small" for the quick version
 * </pre>
 *
 * {@link DetectorTrialsTest} runs the small version and checks the goals on it.
 */
final class DetectorTrials {
  static final double GOAL_FALSE_ALARMS_PER_1000 = 1.0;
  static final int GOAL_BLOW_UP_SAMPLES = 3;
  static final int GOAL_PLATEAU_EVALUATIONS = 3;

  /** One line of the false-alarm table. */
  record Rate(String detector, String scenario, String noise, long judged, long spurious) {
    double perThousand() {
      return judged == 0 ? 0 : 1000.0 * spurious / judged;
    }
  }

  /** One line of the delay table; delays are null for misses. */
  record Delay(
      String detector, String scenario, String noise, List<Integer> delays, Integer goal) {
    int trials() {
      return delays.size();
    }

    int[] hits() {
      return delays.stream().filter(d -> d != null).mapToInt(Integer::intValue).sorted().toArray();
    }

    int missed() {
      return trials() - hits().length;
    }

    double withinGoal() {
      int[] h = hits();
      long ok = goal == null ? 0 : Arrays.stream(h).filter(d -> d <= goal).count();
      return trials() == 0 ? 0 : (double) ok / trials();
    }

    int quantile(double q) {
      int[] h = hits();
      return h.length == 0 ? -1 : h[Math.min(h.length - 1, (int) Math.floor(q * h.length))];
    }
  }

  /** How much to run: scale 1 is the full measurement. */
  record Size(int seeds, int trainLength, int validationRuns, int validationLength, int trials) {
    static Size full() {
      return new Size(20, 50_000, 400, 400, 400);
    }

    static Size small() {
      return new Size(2, 8_000, 30, 400, 40);
    }
  }

  static final double[] TRAIN_NOISE = {0.02, 0.05, 0.1, 0.2};
  static final double[] VALIDATION_NOISE = {0.002, 0.005, 0.01, 0.02};

  private DetectorTrials() {}

  public static void main(String[] args) {
    Size size = args.length > 0 && args[0].equals("small") ? Size.small() : Size.full();
    List<Rate> rates = falseAlarms(size);
    List<Delay> delays = delays(size);
    System.out.println(rateTable(rates));
    System.out.println();
    System.out.println(delayTable(delays));
  }

  // ---------------------------------------------------------------- detectors under test

  static Detector spike() {
    return DetectorKind.RISES.create("train", java.util.Map.of());
  }

  static GrowthDetector growth() {
    return new GrowthDetector(GrowthDetector.DEFAULT_WINDOW, GrowthDetector.DEFAULT_ALPHA);
  }

  static OscillationDetector oscillation() {
    return new OscillationDetector(
        OscillationDetector.DEFAULT_WINDOW,
        OscillationDetector.DEFAULT_MAX_AUTOCORR,
        OscillationDetector.DEFAULT_MAX_REL_SLOPE);
  }

  static PlateauDetector plateau() {
    return new PlateauDetector(
        PlateauDetector.DEFAULT_OVER,
        PlateauDetector.DEFAULT_MIN_REL_GAIN,
        PlateauDetector.DEFAULT_ALPHA);
  }

  static CreepDetector creep() {
    return new CreepDetector(
        CreepDetector.DEFAULT_OVER,
        CreepDetector.DEFAULT_ALPHA,
        CreepDetector.DEFAULT_MAX_REL_SLOPE_PER_EVAL);
  }

  static OverfitDetector overfit(OverfitDetector.Kind kind) {
    double threshold =
        switch (kind) {
          case GL -> OverfitDetector.DEFAULT_GL_THRESHOLD;
          case PQ -> OverfitDetector.DEFAULT_PQ_THRESHOLD;
          case UP -> OverfitDetector.DEFAULT_UP_STRIPS;
        };
    return new OverfitDetector(kind, threshold, Prechelt.DEFAULT_STRIP);
  }

  // ---------------------------------------------------------------- series

  static double[] descending(int n, double a, double b, double tau) {
    double[] x = new double[n];
    for (int t = 0; t < n; t++) {
      x[t] = a + b * Math.exp(-t / tau);
    }
    return x;
  }

  static double[] constant(int n, double level) {
    double[] x = new double[n];
    Arrays.fill(x, level);
    return x;
  }

  /** Multiplicative log-normal (or heavy-tailed) noise around the clean curve. */
  static double[] noisy(double[] clean, double sigma, boolean heavy, Random random) {
    double[] x = new double[clean.length];
    for (int t = 0; t < clean.length; t++) {
      x[t] = clean[t] * Math.exp(sigma * (heavy ? studentT3(random) : random.nextGaussian()));
    }
    return x;
  }

  /** Student t with 3 degrees of freedom, scaled to unit variance. */
  static double studentT3(Random random) {
    double z = random.nextGaussian();
    double chi = 0;
    for (int i = 0; i < 3; i++) {
      double g = random.nextGaussian();
      chi += g * g;
    }
    return z / Math.sqrt(chi / 3) / Math.sqrt(3);
  }

  /** Indices at which the detector fired (reset after each firing). */
  static List<Integer> firings(Detector detector, double[] x) {
    List<Integer> at = new ArrayList<>();
    for (int t = 0; t < x.length; t++) {
      if (detector.offer(t, x[t]).isPresent()) {
        at.add(t);
        detector.reset();
      }
    }
    return at;
  }

  /** First index at or after {@code from} where the detector fires, or -1 (reset on earlier). */
  static int firstFiringFrom(Detector detector, double[] x, int from, int[] earlyCount) {
    for (int t = 0; t < x.length; t++) {
      if (detector.offer(t, x[t]).isPresent()) {
        if (t >= from) {
          return t;
        }
        earlyCount[0]++;
        detector.reset();
      }
    }
    return -1;
  }

  // ---------------------------------------------------------------- false alarms

  static List<Rate> falseAlarms(Size size) {
    List<Rate> rows = new ArrayList<>();
    trainFalseAlarms(size, rows);
    validationFalseAlarms(size, rows);
    return rows;
  }

  private static void trainFalseAlarms(Size size, List<Rate> rows) {
    int n = size.trainLength();
    double[] descending = descending(n, 0.3, 2.0, n / 8.0);
    double[] flat = constant(n, 0.5);
    List<String> names = List.of("rises", "climbs", "wobbles", "breaks", "stuck_at_chance");
    List<Supplier<Detector>> makers =
        List.of(
            DetectorTrials::spike,
            DetectorTrials::growth,
            DetectorTrials::oscillation,
            NonFiniteDetector::new,
            () -> new ChanceLevelDetector(10, ChanceLevelDetector.DEFAULT_TOLERANCE, n / 8));
    for (int shape = 0; shape < 3; shape++) {
      double[] clean = shape == 1 ? flat : descending;
      String scenario =
          switch (shape) {
            case 0 -> "train descending";
            case 1 -> "train flat";
            default -> "train desc., x20 batches";
          };
      for (int level = 0; level <= TRAIN_NOISE.length; level++) {
        boolean heavy = level == TRAIN_NOISE.length;
        double sigma = heavy ? 0.1 : TRAIN_NOISE[level];
        long[] spurious = new long[names.size()];
        long judged = 0;
        for (int seed = 0; seed < size.seeds(); seed++) {
          double[] x = noisy(clean, sigma, heavy, new Random(1000L * seed + level + 17 * shape));
          if (shape == 2) {
            for (int t = 500; t < n; t += 1000) {
              x[t] *= 20; // one very bad batch in every 1000
            }
          }
          judged += n;
          for (int d = 0; d < names.size(); d++) {
            if (shape == 1 && names.get(d).equals("stuck_at_chance")) {
              continue; // a flat loss of 0.5 is far below chance for 10 classes: not informative
            }
            spurious[d] += firings(makers.get(d).get(), x).size();
          }
        }
        for (int d = 0; d < names.size(); d++) {
          if (shape == 1 && names.get(d).equals("stuck_at_chance")) {
            continue;
          }
          rows.add(new Rate(names.get(d), scenario, noiseLabel(sigma, heavy), judged, spurious[d]));
        }
      }
    }
  }

  private static void validationFalseAlarms(Size size, List<Rate> rows) {
    int n = size.validationLength();
    double tau = n / 5.0;
    double[] clean = descending(n, 0.35, 1.9, tau);
    int over = PlateauDetector.DEFAULT_OVER;
    double minGain = PlateauDetector.DEFAULT_MIN_REL_GAIN;
    int creepOver = CreepDetector.DEFAULT_OVER;
    double creepLimit = CreepDetector.DEFAULT_MAX_REL_SLOPE_PER_EVAL;
    // Where the noise-free curve clearly is not flat (gain over the window >= 2x the limit) and
    // clearly not slow (relative slope >= 2x the creep limit).
    boolean[] clearlyImproving = new boolean[n];
    boolean[] clearlyFast = new boolean[n];
    for (int t = 0; t < n; t++) {
      if (t >= over) {
        double gain = (clean[t - over] - clean[t]) / clean[t - over];
        clearlyImproving[t] = gain >= 2 * minGain;
      }
      double slope = 1.9 / tau * Math.exp(-t / tau);
      clearlyFast[t] = slope / clean[t] >= 2 * creepLimit;
    }
    for (double sigma : VALIDATION_NOISE) {
      long judgedPlateau = 0;
      long spuriousPlateau = 0;
      long judgedCreep = 0;
      long spuriousCreep = 0;
      long judgedFlat = 0;
      long spuriousCreepFlat = 0;
      long judgedOverfit = 0;
      long[] spuriousOverfit = new long[3];
      for (int run = 0; run < size.validationRuns(); run++) {
        Random random = new Random(77_000L + run + Math.round(sigma * 1e6));
        double[] v = noisy(clean, sigma, false, random);
        for (int t = 0; t < n; t++) {
          judgedPlateau += clearlyImproving[t] ? 1 : 0;
          judgedCreep += clearlyFast[t] ? 1 : 0;
        }
        for (int t : firings(plateau(), v)) {
          spuriousPlateau += clearlyImproving[t] ? 1 : 0;
        }
        for (int t : firings(creep(), v)) {
          spuriousCreep += clearlyFast[t] ? 1 : 0;
        }
        double[] flat = noisy(constant(n, 0.4), sigma, false, random);
        judgedFlat += n;
        spuriousCreepFlat += firings(creep(), flat).size();
        // Overfitting: validation keeps descending; train (10 samples per evaluation) too.
        judgedOverfit += n;
        OverfitDetector.Kind[] kinds = OverfitDetector.Kind.values();
        for (int k = 0; k < kinds.length; k++) {
          OverfitDetector o = overfit(kinds[k]);
          Random trainRandom = new Random(5_000L + run);
          for (int t = 0; t < n; t++) {
            for (int j = 0; j < 10; j++) {
              double clean10 = 0.25 + 2.0 * Math.exp(-(t + j / 10.0) / tau);
              o.offerTrain(10L * t + j, clean10 * Math.exp(0.1 * trainRandom.nextGaussian()));
            }
            if (o.offer(10L * t + 9, v[t]).isPresent()) {
              spuriousOverfit[k]++;
              o.reset();
            }
          }
        }
      }
      String noise = noiseLabel(sigma, false);
      rows.add(new Rate("flattens", "validation descending", noise, judgedPlateau, spuriousPlateau));
      rows.add(plateauAtTwiceTheGain(size, sigma, PlateauDetector.DEFAULT_MIN_REL_GAIN));
      double scaledGain = Math.max(PlateauDetector.DEFAULT_MIN_REL_GAIN, 2.5 * sigma);
      if (scaledGain > PlateauDetector.DEFAULT_MIN_REL_GAIN) {
        rows.add(plateauAtTwiceTheGain(size, sigma, scaledGain));
      }
      rows.add(new Rate("creeps", "validation descending", noise, judgedCreep, spuriousCreep));
      rows.add(new Rate("creeps", "validation flat", noise, judgedFlat, spuriousCreepFlat));
      for (OverfitDetector.Kind kind : OverfitDetector.Kind.values()) {
        rows.add(
            new Rate(
                "overfits " + kind,
                "validation descending",
                noise,
                judgedOverfit,
                spuriousOverfit[kind.ordinal()]));
      }
    }
  }

  /**
   * Validation improving at a constant relative rate of exactly twice the gain limit per window
   * (the edge of "clearly improving"), with the plateau detector's gain set to {@code gain}.
   */
  private static Rate plateauAtTwiceTheGain(Size size, double sigma, double gain) {
    int over = PlateauDetector.DEFAULT_OVER;
    int n = size.validationLength();
    double perEval = Math.pow(1 - 2 * gain, 1.0 / over);
    double[] clean = new double[n];
    for (int t = 0; t < n; t++) {
      clean[t] = 0.8 * Math.pow(perEval, t);
    }
    long judged = 0;
    long spurious = 0;
    for (int run = 0; run < size.validationRuns(); run++) {
      double[] v = noisy(clean, sigma, false, new Random(88_000L + run + Math.round(sigma * 1e6)));
      judged += n - over;
      spurious +=
          firings(new PlateauDetector(over, gain, PlateauDetector.DEFAULT_ALPHA), v).size();
    }
    return new Rate(
        "flattens gain " + Figures.percent(gain), "validation at 2x gain/window", noiseLabel(sigma, false), judged, spurious);
  }

  // ---------------------------------------------------------------- delays

  static List<Delay> delays(Size size) {
    List<Delay> rows = new ArrayList<>();
    blowUpDelays(size, rows);
    plateauDelays(size, rows);
    otherDelays(size, rows);
    return rows;
  }

  private static void blowUpDelays(Size size, List<Delay> rows) {
    int n = 6000;
    double[] base = descending(n, 0.3, 2.0, 750);
    String[] shapes = {"jump x5", "jump x10", "growth x1.2/sample", "growth x1.5/sample", "growth x2/sample"};
    double k = DetectorKind.RISES.number(java.util.Map.of(), "above_level");
    for (double sigma : TRAIN_NOISE) {
      for (int shape = 0; shape < shapes.length; shape++) {
        List<Integer> spikeDelays = new ArrayList<>();
        List<Integer> onsetErrors = new ArrayList<>();
        for (int trial = 0; trial < size.trials(); trial++) {
          Random random = new Random(31_000L * (shape + 1) + trial + Math.round(sigma * 1e4));
          int onset = 1500 + random.nextInt(3000);
          double[] clean = base.clone();
          int visible = -1; // first sample whose noise-free value is above k x the best before
          for (int t = onset; t < n; t++) {
            int j = t - onset + 1;
            double factor =
                switch (shape) {
                  case 0 -> 5;
                  case 1 -> 10;
                  case 2 -> Math.pow(1.2, j);
                  case 3 -> Math.pow(1.5, j);
                  default -> Math.pow(2, j);
                };
            clean[t] = base[t] * Math.min(factor, 1e6);
            if (visible < 0 && clean[t] > k * base[onset - 1]) {
              visible = t;
            }
          }
          double[] x = noisy(clean, sigma, false, random);
          Detector s = spike();
          OnsetLocator locator =
              new OnsetLocator(
                  OnsetLocator.DEFAULT_WINDOW,
                  OnsetLocator.DEFAULT_ALLOWANCE,
                  OnsetLocator.DEFAULT_THRESHOLD);
          Integer delay = null;
          for (int t = 0; t < n; t++) {
            locator.add(t, x[t]);
            if (s.offer(t, x[t]).isPresent()) {
              if (t < onset) {
                s.reset();
                continue;
              }
              delay = Math.max(1, t - visible + 1);
              Optional<OnsetLocator.Onset> found = locator.locate();
              onsetErrors.add(found.map(o -> (int) (o.onsetStep() - onset)).orElse(null));
              break;
            }
          }
          spikeDelays.add(delay);
        }
        String noise = noiseLabel(sigma, false);
        rows.add(new Delay("rises", shapes[shape], noise, spikeDelays, GOAL_BLOW_UP_SAMPLES));
        rows.add(new Delay("onset error (steps)", shapes[shape], noise, onsetErrors, 0));
      }
    }
  }

  private static void plateauDelays(Size size, List<Delay> rows) {
    int n = 260;
    int over = PlateauDetector.DEFAULT_OVER;
    for (double sigma : VALIDATION_NOISE) {
      List<Integer> delays = new ArrayList<>();
      for (int trial = 0; trial < size.trials(); trial++) {
        Random random = new Random(52_000L + trial + Math.round(sigma * 1e6));
        int onset = 40 + random.nextInt(80);
        double[] clean = descending(n, 0.35, 1.9, 40);
        for (int t = onset + 1; t < n; t++) {
          clean[t] = clean[onset];
        }
        double[] v = noisy(clean, sigma, false, random);
        int visible = onset + over; // over evaluations after the last improving one
        int[] early = new int[1];
        int fired = firstFiringFrom(plateau(), v, visible - over, early);
        delays.add(fired < 0 || fired > visible + 50 ? null : Math.max(0, fired - visible));
      }
      rows.add(
          new Delay(
              "flattens",
              "plateau after descent",
              noiseLabel(sigma, false),
              delays,
              GOAL_PLATEAU_EVALUATIONS));
    }
  }

  private static void otherDelays(Size size, List<Delay> rows) {
    // Slow divergence for the trend detector: growth by 1 % per sample from a noisy level.
    for (double sigma : TRAIN_NOISE) {
      List<Integer> delays = new ArrayList<>();
      for (int trial = 0; trial < size.trials(); trial++) {
        Random random = new Random(61_000L + trial + Math.round(sigma * 1e4));
        int n = 1500;
        int onset = 500 + random.nextInt(400);
        double[] clean = constant(n, 0.5);
        for (int t = onset; t < n; t++) {
          clean[t] = 0.5 * Math.pow(1.01, t - onset + 1);
        }
        double[] x = noisy(clean, sigma, false, random);
        int fired = firstFiringFrom(growth(), x, onset, new int[1]);
        delays.add(fired < 0 ? null : fired - onset + 1);
      }
      rows.add(new Delay("climbs", "rise 1 %/sample", noiseLabel(sigma, false), delays, null));
    }
    // Sloshing: a bounce of amplitude A = 2 sigma (relative) on a flat level.
    for (double sigma : TRAIN_NOISE) {
      List<Integer> delays = new ArrayList<>();
      for (int trial = 0; trial < size.trials(); trial++) {
        Random random = new Random(71_000L + trial + Math.round(sigma * 1e4));
        int n = 1200;
        int onset = 300 + random.nextInt(300);
        double[] x = noisy(constant(n, 0.6), sigma, false, random);
        for (int t = onset; t < n; t++) {
          x[t] *= 1 + 2 * sigma * ((t % 2 == 0) ? 1 : -1);
        }
        int fired = firstFiringFrom(oscillation(), x, onset, new int[1]);
        delays.add(fired < 0 ? null : fired - onset + 1);
      }
      rows.add(
          new Delay("wobbles", "bounce A = 2 sigma", noiseLabel(sigma, false), delays, null));
    }
    // Steady slow progress: validation falling 0.1 % per evaluation.
    for (double sigma : new double[] {0.0002, 0.0005, 0.001}) {
      List<Integer> delays = new ArrayList<>();
      for (int trial = 0; trial < size.trials(); trial++) {
        Random random = new Random(81_000L + trial + Math.round(sigma * 1e6));
        int n = 200;
        double[] clean = new double[n];
        for (int t = 0; t < n; t++) {
          clean[t] = 0.6 * Math.pow(0.999, t);
        }
        double[] v = noisy(clean, sigma, false, random);
        int fired = firstFiringFrom(creep(), v, 0, new int[1]);
        delays.add(fired < 0 ? null : fired + 1);
      }
      rows.add(new Delay("creeps", "falls 0.1 %/eval (evals to fire)", noiseLabel(sigma, false), delays, null));
    }
    // Overfitting: validation turns upward by 0.5 % of its level per evaluation at the onset.
    for (OverfitDetector.Kind kind : OverfitDetector.Kind.values()) {
      for (double sigma : new double[] {0.002, 0.01}) {
        List<Integer> delays = new ArrayList<>();
        for (int trial = 0; trial < size.trials(); trial++) {
          Random random = new Random(91_000L + trial + Math.round(sigma * 1e6));
          int n = 300;
          int onset = 100 + random.nextInt(60);
          OverfitDetector o = overfit(kind);
          Integer delay = null;
          for (int t = 0; t < n && delay == null; t++) {
            double train = 0.25 + 2.0 * Math.exp(-t / 60.0);
            double val = t < onset ? 0.4 + 1.8 * Math.exp(-t / 60.0) : 0.4 + 1.8 * Math.exp(-onset / 60.0);
            if (t >= onset) {
              val *= 1 + 0.005 * (t - onset + 1);
            }
            o.offerTrain(t, train * Math.exp(0.05 * random.nextGaussian()));
            if (o.offer(t, val * Math.exp(sigma * random.nextGaussian())).isPresent()) {
              if (t >= onset) {
                delay = t - onset + 1;
              } else {
                o.reset();
              }
            }
          }
          delays.add(delay);
        }
        rows.add(
            new Delay(
                "overfits " + kind, "validation rises 0.5 %/eval", noiseLabel(sigma, false), delays, null));
      }
    }
  }

  // ---------------------------------------------------------------- printing

  static String noiseLabel(double sigma, boolean heavy) {
    return (heavy ? "t3 " : "") + Figures.percent(sigma);
  }

  static String rateTable(List<Rate> rows) {
    StringBuilder b = new StringBuilder();
    b.append(String.format(Locale.ROOT, "%-22s %-24s %-9s %10s %9s %9s%n",
        "detector", "scenario", "noise", "judged", "spurious", "per 1000"));
    for (Rate r : rows) {
      b.append(String.format(Locale.ROOT, "%-22s %-24s %-9s %10d %9d %9.3f%n",
          r.detector(), r.scenario(), r.noise(), r.judged(), r.spurious(), r.perThousand()));
    }
    return b.toString();
  }

  static String delayTable(List<Delay> rows) {
    StringBuilder b = new StringBuilder();
    b.append(String.format(Locale.ROOT, "%-20s %-34s %-7s %6s %6s %6s %6s %7s %6s%n",
        "detector", "scenario", "noise", "trials", "median", "p90", "max", "<=goal", "missed"));
    for (Delay d : rows) {
      String goal = d.goal() != null ? String.format(Locale.ROOT, "%6.1f%%", 100 * d.withinGoal()) : "     -";
      int[] h = d.hits();
      b.append(String.format(Locale.ROOT, "%-20s %-34s %-7s %6d %6d %6d %6d %7s %6d%n",
          d.detector(), d.scenario(), d.noise(), d.trials(), d.quantile(0.5), d.quantile(0.9),
          h.length == 0 ? -1 : h[h.length - 1], goal, d.missed()));
    }
    return b.toString();
  }
}
