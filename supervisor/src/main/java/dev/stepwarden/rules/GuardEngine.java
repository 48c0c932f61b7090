package dev.stepwarden.rules;

import dev.stepwarden.metrics.Sample;
import dev.stepwarden.rules.Decision.Ending;
import dev.stepwarden.rules.GuardFile.Action;
import dev.stepwarden.rules.GuardFile.Guard;
import java.util.ArrayList;
import java.util.LinkedHashMap;
import java.util.List;
import java.util.Map;
import java.util.Optional;
import java.util.Set;

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
 *   <li>after any intervention every detector forgets its window (the series starts a new regime);
 *   <li>rates are clamped to the limits; a guard that would lower the rate when it already sits
 *       on the floor ends the run: a divergence guard gives up (exit 4), any other stops early
 *       (exit 3) since lowering further is pointless (common practice);
 *   <li>a rewind beyond the rewind budget gives up;
 *   <li>a non-finite training value that no guard handled gives up (the built-in safety net).
 * </ul>
 */
public final class GuardEngine {
  /** Detectors whose firing means the run is diverging rather than merely done. */
  static final Set<String> DIVERGENCE = Set.of("breaks", "rises", "climbs", "wobbles",
      "stuck_at_chance");

  static final String BUILT_IN_NON_FINITE = "(non-finite train value)";

  private final GuardFile file;
  private final List<Armed> armed = new ArrayList<>();
  private double rate;
  private int rewinds;
  private long samples;
  private double bestValidation = Double.NaN;
  private long bestValidationStep = -1;

  public GuardEngine(GuardFile file) {
    this.file = file;
    this.rate = file.run().learningRate();
    for (Guard g : file.guards()) {
      armed.add(new Armed(g, Detectors.create(g.when())));
    }
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

  /** Feeds one sample; returns the decision when a guard (or the safety net) fired. */
  public Optional<Decision> onSample(Sample sample) {
    samples++;
    Double v = sample.value("validation");
    if (v != null && Double.isFinite(v)
        && (Double.isNaN(bestValidation) || v < bestValidation)) {
      bestValidation = v;
      bestValidationStep = sample.step();
    }
    Decision decision = null;
    for (Armed a : armed) {
      Double value = sample.value(a.guard.when().series());
      if (value == null) {
        continue;
      }
      a.evaluations++;
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
    if (decision == null) {
      Double train = sample.value("train");
      if (train != null && !Double.isFinite(train)) {
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
    boolean divergence = DIVERGENCE.contains(g.when().detector());
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
    return Optional.of(decision(g, s, evidence, after, Ending.CONTINUE, note));
  }

  private Decision decision(Guard g, Sample s, Evidence e, double after, Ending ending,
      String note) {
    return new Decision(g.name(), s.step(), s.wallMillis(), e, g.actions(), rate, after, ending,
        note);
  }

  private void apply(Decision d) {
    rate = d.rateAfter();
    if (d.rewinds()) {
      rewinds++;
    }
    for (Armed a : armed) {
      a.detector.reset();
    }
  }

  private static final class Armed {
    final Guard guard;
    final Detector detector;
    long evaluations;
    long restUntil;

    Armed(Guard guard, Detector detector) {
      this.guard = guard;
      this.detector = detector;
    }
  }
}
