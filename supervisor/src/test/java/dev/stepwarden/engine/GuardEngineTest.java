package dev.stepwarden.engine;

import static org.assertj.core.api.Assertions.assertThat;

import dev.stepwarden.metrics.Sample;
import dev.stepwarden.rules.ConfigException;
import dev.stepwarden.rules.GuardFile;
import dev.stepwarden.rules.GuardFiles;
import java.nio.charset.StandardCharsets;
import java.nio.file.Path;
import java.util.ArrayList;
import java.util.List;
import java.util.Map;
import java.util.Optional;
import org.junit.jupiter.api.Test;

class GuardEngineTest {
  static GuardFile rules(String guards, double rate, double min) throws ConfigException {
    return GuardFiles.parse(("run:\n  learning_rate: " + rate + "\n"
        + "limits:\n  learning_rate: { min: " + min + ", max: 1.0 }\n  rewinds: 1\n"
        + "guards:\n" + guards).getBytes(StandardCharsets.UTF_8), Path.of("t.yaml"));
  }

  static Sample val(long step, double v) {
    return new Sample(step, Double.NaN, step, Map.of("validation", v));
  }

  static Sample train(long step, double v) {
    return new Sample(step, Double.NaN, step, Map.of("train", v));
  }

  static final String FLAT = "  - name: flat\n"
      + "    when: { flattens: { over: 3, gain_below: 1% } }\n"
      + "    do: { scale: 0.5 }\n";

  @Test
  void plateauLowersTheRateOnceAndRecordsEvidence() throws Exception {
    GuardEngine e = new GuardEngine(rules(FLAT, 0.1, 1e-3));
    List<Decision> ds = new ArrayList<>();
    double[] values = {1.0, 0.8, 0.7, 0.7, 0.7, 0.7, 0.7};
    for (int i = 0; i < values.length; i++) {
      e.onSample(val(i * 100L, values[i])).ifPresent(ds::add);
    }
    assertThat(ds).hasSize(1);
    Decision d = ds.get(0);
    assertThat(d.guard()).isEqualTo("flat");
    assertThat(d.rateBefore()).isEqualTo(0.1);
    assertThat(d.rateAfter()).isEqualTo(0.05);
    assertThat(d.ending()).isEqualTo(Decision.Ending.CONTINUE);
    assertThat(d.evidence().figures()).containsKeys("best", "best_step");
    assertThat(e.rate()).isEqualTo(0.05);
    assertThat(e.bestValidation()).isEqualTo(0.7);
  }

  @Test
  void loweringAtTheFloorStopsEarlyAsASuccess() throws Exception {
    GuardEngine e = new GuardEngine(rules(FLAT, 0.002, 0.001));
    List<Decision> ds = new ArrayList<>();
    for (int i = 0; i < 20 && (ds.isEmpty()
        || ds.get(ds.size() - 1).ending() == Decision.Ending.CONTINUE); i++) {
      e.onSample(val(i, 0.5)).ifPresent(ds::add);
    }
    assertThat(ds).hasSize(2);
    assertThat(ds.get(0).rateAfter()).isEqualTo(0.001);
    assertThat(ds.get(1).ending()).isEqualTo(Decision.Ending.STOP_EARLY);
    assertThat(ds.get(1).note()).contains("floor");
  }

  @Test
  void divergenceAtTheFloorGivesUp() throws Exception {
    String rises = "  - name: spike\n"
        + "    when: { rises: { above_level: 2, samples: 1 } }\n"
        + "    do: { scale: 0.5 }\n";
    GuardEngine e = new GuardEngine(rules(rises, 0.001, 0.001));
    for (int i = 0; i < 10; i++) {
      e.onSample(train(i, 1.0 + 0.01 * (i % 3)));
    }
    Optional<Decision> d = e.onSample(train(10, 5.0));
    assertThat(d).hasValueSatisfying(x -> assertThat(x.ending())
        .isEqualTo(Decision.Ending.GIVE_UP));
  }

  @Test
  void nonFiniteTrainingLossGivesUpWhenNoGuardHandlesIt() throws Exception {
    GuardEngine e = new GuardEngine(rules(FLAT, 0.1, 1e-3));
    assertThat(e.onSample(train(1, 0.3))).isEmpty();
    Decision d = e.onSample(train(2, Double.NaN)).orElseThrow();
    assertThat(d.guard()).isEqualTo(GuardEngine.BUILT_IN_NON_FINITE);
    assertThat(d.ending()).isEqualTo(Decision.Ending.GIVE_UP);
  }

  @Test
  void aGuardThatRewindsHandlesNonFiniteBeforeTheSafetyNet() throws Exception {
    String breaks = "  - name: nan\n    when: { breaks: {} }\n    do: [ rewind, { scale: 0.1 } ]\n";
    GuardEngine e = new GuardEngine(rules(breaks, 0.1, 1e-3));
    Decision d = e.onSample(train(2, Double.POSITIVE_INFINITY)).orElseThrow();
    assertThat(d.rewinds()).isTrue();
    assertThat(d.rateAfter()).isEqualTo(0.1 * 0.1);
    // the budget is one rewind: the second one gives up
    Decision second = e.onSample(train(3, Double.NaN)).orElseThrow();
    assertThat(second.ending()).isEqualTo(Decision.Ending.GIVE_UP);
    assertThat(second.note()).contains("rewind budget");
  }

  @Test
  void atMostOneInterventionPerSampleInFileOrder() throws Exception {
    String two = "  - name: first\n    when: { breaks: {} }\n    do: { scale: 0.5 }\n"
        + "  - name: second\n    when: { breaks: {} }\n    do: { scale: 0.1 }\n";
    GuardEngine e = new GuardEngine(rules(two, 0.1, 1e-4));
    Decision d = e.onSample(train(1, Double.NaN)).orElseThrow();
    assertThat(d.guard()).isEqualTo("first");
    assertThat(e.rate()).isEqualTo(0.05);
  }

  @Test
  void thenWaitRestsTheGuardForEvaluations() throws Exception {
    String g = "  - name: nan\n    when: { breaks: {} }\n    do: { scale: 0.5 }\n"
        + "    then_wait: 2\n";
    GuardEngine e = new GuardEngine(rules(g, 0.1, 1e-4));
    assertThat(e.onSample(train(1, Double.NaN))).isPresent();
    // resting guard: the built-in safety net takes the next non-finite value
    assertThat(e.onSample(train(2, Double.NaN)).orElseThrow().guard())
        .isEqualTo(GuardEngine.BUILT_IN_NON_FINITE);
  }

  @Test
  void sameSamplesGiveSameDecisions() throws Exception {
    List<String> a = new ArrayList<>();
    List<String> b = new ArrayList<>();
    for (List<String> out : List.of(a, b)) {
      GuardEngine e = new GuardEngine(rules(FLAT, 0.1, 1e-3));
      java.util.Random r = new java.util.Random(7);
      for (int i = 0; i < 500; i++) {
        e.onSample(val(i, 1.0 / (1 + i * 0.01) + r.nextGaussian() * 0.01))
            .ifPresent(d -> out.add(d.step() + " " + d.rateAfter()));
      }
    }
    assertThat(a).isNotEmpty().isEqualTo(b);
  }

  @Test
  void aNewGenerationFromScratchIsNotJudgedAgainstTheEndedLaunchsBest() throws Exception {
    String rises = "  - name: spike\n"
        + "    when: { rises: { above_level: 3, samples: 1 } }\n"
        + "    do: { scale: 0.5 }\n";
    GuardEngine e = new GuardEngine(rules(rises, 0.1, 1e-4));
    for (int i = 0; i < 20; i++) {
      assertThat(e.onSample(train(i, 2.3 / (1 + i)))).isEmpty();
    }
    e.beginGeneration(0, true);
    // a fresh network starts near ln(10) again: far above the ended launch's best, yet healthy
    assertThat(e.onSample(train(0, 2.3))).isEmpty();
    assertThat(e.onSample(train(1, 2.2))).isEmpty();
    assertThat(e.rate()).isEqualTo(0.1);
  }
}
