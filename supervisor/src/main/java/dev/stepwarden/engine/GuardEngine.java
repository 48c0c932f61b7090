package dev.stepwarden.engine;

import dev.stepwarden.detectors.Detector;
import dev.stepwarden.detectors.DetectorKind;
import dev.stepwarden.detectors.Evidence;
import dev.stepwarden.detectors.OnsetLocator;
import dev.stepwarden.detectors.OverfitDetector;
import dev.stepwarden.engine.Decision.Ending;
import dev.stepwarden.metrics.Sample;
import dev.stepwarden.rules.GuardFile.Action;
import dev.stepwarden.rules.GuardFile.Guard;
import dev.stepwarden.rules.GuardFile;
import java.util.ArrayList;
import java.util.LinkedHashMap;
import java.util.List;
import java.util.Map;
import java.util.Optional;

/**
 * The policy: feeds each sample to the guards in file order and turns the first that fires into a
 * {@link Decision}.
 *
 * <p>Design: one engine per run, driven by one thread (the supervisor serialises calls). Live runs
 * and {@code replay} use this same class, so the same samples always give the same decisions:
 * no clocks or randomness inside. Rules, in order:
 * <ul>
 *   <li>at most one intervention per sample; a guard that fired rests for {@code then_wait}
 *       evaluations of its series;
 *   <li>after any intervention the trend detectors forget their window (the series starts a new
 *       regime), while the level that {@code rises} and the near-zero scale of {@code climbs} and
 *       {@code wobbles} judge against stays that of the launch ({@link #beginGeneration} resets
 *       or restores it);
 *   <li>rates are clamped to the limits; a guard that would lower the rate when it already sits
 *       on the floor ends the run: a divergence guard gives up (exit 4), any other stops early
 *       (exit 3) since lowering further is pointless (common practice);
 *   <li>a rewind beyond the rewind budget gives up;
 *   <li>a non-finite training value that no guard handled gives up (the built-in safety net).
 * </ul>
 */
public final class GuardEngine {
  static final String BUILT_IN_NON_FINITE = "(non-finite train value)";

  static final String UNDO_RAISE = "(undo raise)";

  private final GuardFile file;
  private final Armed[] armed;
  /** Watches the training series so a rewind can go back to before the trouble began. */
  private final OnsetLocator onset = new OnsetLocator(OnsetLocator.DEFAULT_WINDOW,
      OnsetLocator.DEFAULT_ALLOWANCE, OnsetLocator.DEFAULT_THRESHOLD);
  /** A raised rate on probation (bold driver): undone when the next window is worse. */
  private Probation probation;
  private double rate;
  private int rewinds;
  private long samples;
  private double bestValidation = Double.NaN;
  private long bestValidationStep = -1;

  public GuardEngine(GuardFile file) {
    this.file = file;
    this.rate = file.run().learningRate();
    List<Armed> list = new ArrayList<>();
    for (Guard g : file.guards()) {
      DetectorKind kind = DetectorKind.named(g.when().detector()).orElseThrow();
      list.add(new Armed(g, kind, kind.create(g.when().series(), g.when().params())));
    }
    this.armed = list.toArray(new Armed[0]);
  }

  /** The rate now in force (as decided; confirmation is the steering layer's business). */
  public double rate() {
    return rate;
  }

  /** Rewinds decided so far. */
  public int rewinds() {
    return rewinds;
  }

  /** Samples seen. */
  public long samples() {
    return samples;
  }

  /** Best validation value so far, NaN when none was seen. */
  public double bestValidation() {
    return bestValidation;
  }

  /** Step of {@link #bestValidation()}, -1 when none. */
  public long bestValidationStep() {
    return bestValidationStep;
  }

  /** The state a resumed run needs ({@link #restore}). */
  public GuardEngineState snapshot() {
    Map<String, long[]> rests = new LinkedHashMap<>();
    for (Armed a : armed) {
      rests.put(a.guard.name(), new long[] {a.evaluations, a.restUntil});
    }
    return new GuardEngineState(rate, rewinds, samples, bestValidation, bestValidationStep, rests);
  }

  /** Continues from a {@link #snapshot()} of an earlier engine on the same guard file. */
  public void restore(GuardEngineState s) {
    rate = s.rate();
    rewinds = s.rewinds();
    samples = s.samples();
    bestValidation = s.bestValidation();
    bestValidationStep = s.bestValidationStep();
    for (Armed a : armed) {
      long[] r = s.rests().get(a.guard.name());
      if (r != null && r.length == 2) {
        a.evaluations = r[0];
        a.restUntil = r[1];
      }
    }
  }

  /**
   * Starts a new launch generation; the supervisor calls it before each launch after the first,
   * and no sample of an ended generation reaches the engine afterwards.
   *
   * <p>Reset semantics: every detector forgets its window, a raise on probation is dropped and
   * the onset watch starts over, because the lines of the ended generation no longer describe the
   * network that trains now. The rate, the rewind count, the best validation value and the
   * guards' rests carry over (they belong to the run, not to a launch).
   * <ul>
   *   <li>{@code fromScratch}: a new network (restart with no checkpoint): a new reference is
   *       built from the new generation's own lines;
   *   <li>otherwise the launch resumes a checkpoint of step {@code fromStep} (a rewind or a crash
   *       restart): the reference the engine had at that step, when it still knows it, is
   *       restored, so a rewound run is judged against the level it had before the trouble.
   * </ul>
   *
   * @param fromStep the step the launch resumes at (ignored when {@code fromScratch})
   * @param fromScratch whether the launch starts a new network without a checkpoint
   */
  public void beginGeneration(long fromStep, boolean fromScratch) {
    for (Armed a : armed) {
      if (fromScratch) {
        a.detector.reset();
      } else {
        a.detector.rewindTo(fromStep);
      }
    }
    onset.reset();
    probation = null;
  }

  /** Feeds one sample; returns the decision when a guard (or the safety net) fired. */
  public Optional<Decision> onSample(Sample sample) {
    samples++;
    // Unboxed lookups: this runs once per metric line.
    int ti = sample.indexOf("train");
    double train = ti < 0 ? Double.NaN : sample.valueAt(ti);
    if (ti >= 0 && Double.isFinite(train)) {
      onset.add(sample.step(), train);
    }
    int vi = sample.indexOf("validation");
    if (vi >= 0) {
      double v = sample.valueAt(vi);
      if (Double.isFinite(v) && (Double.isNaN(bestValidation) || v < bestValidation)) {
        bestValidation = v;
        bestValidationStep = sample.step();
      }
    }
    Decision decision = null;
    for (Armed a : armed) {
      int ai = sample.indexOf(a.series);
      if (ai < 0) {
        continue;
      }
      double value = sample.valueAt(ai);
      a.evaluations++;
      if (ti >= 0 && a.detector instanceof OverfitDetector o
          && !a.series.equals("train")) {
        o.offerTrain(sample.step(), train);
      }
      // Every detector sees every point, even while resting, so its window stays current.
      Optional<Evidence> fired = a.detector.offer(sample.step(), value);
      if (decision != null || a.evaluations <= a.restUntil || fired.isEmpty()) {
        continue;
      }
      Optional<Decision> planned = plan(a.guard, sample, fired.get());
      a.restUntil = a.evaluations + a.guard.thenWait();
      if (planned.isPresent()) {
        decision = planned.get();
      }
    }
    if (decision == null && probation != null) {
      decision = probation.offer(sample).orElse(null);
    }
    if (decision == null) {
      if (ti >= 0 && !Double.isFinite(train)) {
        Map<String, Object> figures = new LinkedHashMap<>();
        figures.put("value", String.valueOf(train));
        figures.put("step", sample.step());
        decision = new Decision(BUILT_IN_NON_FINITE, sample.step(), sample.wallMillis(),
            new Evidence("breaks", "the training loss is " + train + " at step " + sample.step()
                + " and no guard handled it", figures),
            List.of(new Action.GiveUp()), rate, rate, Ending.GIVE_UP,
            "a non-finite training loss ends the run unless a guard rewinds it");
      }
    }
    if (decision != null) {
      apply(decision);
    }
    return Optional.ofNullable(decision);
  }

  private Optional<Decision> plan(Guard g, Sample s, Evidence evidence) {
    boolean divergence = armedBy(g).kind.divergence();
    double after = rate;
    String note = "";
    for (Action a : g.actions()) {
      if (a instanceof Action.Stop) {
        return Optional.of(decision(g, s, evidence, rate, Ending.STOP_EARLY, ""));
      }
      if (a instanceof Action.GiveUp) {
        return Optional.of(decision(g, s, evidence, rate, Ending.GIVE_UP, ""));
      }
      if (a instanceof Action.Rewind && rewinds >= file.limits().rewinds()) {
        return Optional.of(decision(g, s, evidence, rate, Ending.GIVE_UP,
            "the rewind budget (" + file.limits().rewinds() + ") is spent"));
      }
      if (a instanceof Action.Scale sc) {
        after = rate * sc.factor();
      } else if (a instanceof Action.SetRate sr) {
        after = sr.rate();
      }
    }
    double min = file.limits().minRate();
    double max = file.limits().maxRate();
    if (after < rate && rate <= min * (1 + 1e-12)) {
      return Optional.of(decision(g, s, evidence, rate,
          divergence ? Ending.GIVE_UP : Ending.STOP_EARLY,
          "the rate " + rate + " already sits on the floor " + min
              + (divergence ? " and the run still diverges" : "; lowering further is pointless")));
    }
    if (after > rate && rate >= max * (1 - 1e-12) && !g.rewinds()) {
      return Optional.empty(); // nothing to do: at the ceiling already
    }
    if (after < min) {
      note = "capped at the floor " + min;
      after = min;
    } else if (after > max) {
      note = "capped at the ceiling " + max;
      after = max;
    }
    if (g.rewinds()) {
      evidence = withOnset(evidence);
    }
    return Optional.of(decision(g, s, evidence, after, Ending.CONTINUE, note));
  }

  private Decision decision(Guard g, Sample s, Evidence e, double after, Ending ending,
      String note) {
    return new Decision(g.name(), s.step(), s.wallMillis(), e, g.actions(), rate, after, ending,
        note);
  }

  /** Adds the estimated onset of the trouble (backward CUSUM over the training series). */
  private Evidence withOnset(Evidence e) {
    Optional<OnsetLocator.Onset> o = onset.locate();
    if (o.isEmpty()) {
      return e;
    }
    Map<String, Object> figures = new LinkedHashMap<>(e.figures());
    o.get().figures().forEach(figures::putIfAbsent);
    return new Evidence(e.detector(), e.summary() + "; the rise began near step "
        + o.get().onsetStep(), figures);
  }

  private void apply(Decision d) {
    double before = rate;
    rate = d.rateAfter();
    if (d.rewinds()) {
      rewinds++;
      onset.reset();
    }
    for (Armed a : armed) {
      if (d.rewinds()) {
        // The launch is ending: its remaining lines must not meet the band that just fired.
        // beginGeneration(fromStep, false) restores the band of the checkpoint's time.
        a.detector.rewindTo(Long.MIN_VALUE);
      } else {
        a.detector.rateChanged();
      }
    }
    if (d.guard().equals(UNDO_RAISE)) {
      probation = null;
    } else if (d.ending() == Ending.CONTINUE && rate > before && !d.rewinds()) {
      Armed by = java.util.Arrays.stream(armed).filter(a -> a.guard.name().equals(d.guard()))
          .findFirst().orElseThrow();
      int window = by.guard.when().params().get("over") instanceof Number n ? n.intValue() : 8;
      probation = new Probation(by.guard.when().series(), window, before, d);
    } else {
      probation = null;
    }
  }

  /**
   * The bold-driver check (Vogl et al. 1988; Battiti 1989): a raised rate stays only if the next
   * window of the watched series is no worse than the window that justified the raise; otherwise
   * the rate goes back to what it was. We compare window means, which the noise of single
   * evaluations cannot tip alone.
   */
  private final class Probation {
    private final String series;
    private final int window;
    private final double previousRate;
    private final double referenceMean;
    private double sum;
    private int seen;

    Probation(String series, int window, double previousRate, Decision raise) {
      this.series = series;
      this.window = window;
      this.previousRate = previousRate;
      Object level = raise.evidence().figures().get("level");
      this.referenceMean = level instanceof Number n ? n.doubleValue() : Double.NaN;
    }

    Optional<Decision> offer(Sample s) {
      int i = s.indexOf(series);
      double v = i < 0 ? Double.NaN : s.valueAt(i);
      if (!Double.isFinite(v)) {
        return Optional.empty();
      }
      sum += v;
      seen++;
      if (seen < window) {
        return Optional.empty();
      }
      double mean = sum / seen;
      probation = null;
      if (Double.isNaN(referenceMean) || mean <= referenceMean) {
        return Optional.empty();
      }
      Map<String, Object> f = new LinkedHashMap<>();
      f.put("window", seen);
      f.put("mean_after_raise", mean);
      f.put("mean_before_raise", referenceMean);
      f.put("restored_rate", previousRate);
      Evidence e = new Evidence("creeps", String.format(java.util.Locale.ROOT,
          "%s averaged %.4g over %d evaluations after the raise, worse than %.4g before it;"
              + " the raise is undone", series, mean, seen, referenceMean), f);
      return Optional.of(new Decision(UNDO_RAISE, s.step(), s.wallMillis(), e,
          List.of(new Action.SetRate(previousRate)), rate, previousRate, Ending.CONTINUE,
          "bold driver: a raise that made things worse is taken back"));
    }
  }

  private Armed armedBy(Guard g) {
    for (Armed a : armed) {
      if (a.guard == g) {
        return a;
      }
    }
    throw new IllegalStateException("guard '" + g.name() + "' is not armed");
  }

  private static final class Armed {
    final Guard guard;
    final DetectorKind kind;
    /** The watched series, interned like the samples' names so a lookup matches on identity. */
    final String series;
    final Detector detector;
    long evaluations;
    long restUntil;

    Armed(Guard guard, DetectorKind kind, Detector detector) {
      this.guard = guard;
      this.kind = kind;
      String s = guard.when().series();
      this.series = s == null ? null : s.intern();
      this.detector = detector;
    }
  }
}
