package dev.stepwarden.telemetry;

import static org.assertj.core.api.Assertions.assertThat;

import dev.stepwarden.metrics.Sample;
import dev.stepwarden.engine.Decision;
import dev.stepwarden.detectors.Evidence;
import dev.stepwarden.rules.GuardFile;
import io.micrometer.prometheusmetrics.PrometheusMeterRegistry;
import java.util.List;
import java.util.Map;
import org.junit.jupiter.api.Test;

class RunMetersTest {
  private final MutableClock clock = new MutableClock(1_000_000);
  private final PrometheusMeterRegistry registry = MetricsServer.newRegistry();

  private static Decision decision(String guard, double before, double after,
      GuardFile.Action... actions) {
    return new Decision(guard, 40, 0, new Evidence("rises", "loss rose", Map.of()),
        List.of(actions), before, after, Decision.Ending.CONTINUE, "");
  }

  @Test
  void publishesRateSeriesInterventionsAndLineCountsPerRun() {
    RunMeters m = new RunMeters(registry, "sensor-net", 0.1, clock);
    m.onLaunch(1, "start");
    m.onSample(new Sample(10, Double.NaN, 0, Map.of("train", 2.5)), 0.1);
    m.onSample(new Sample(20, Double.NaN, 0, Map.of("train", 2.25, "validation", 2.75)), 0.1);
    m.onLines(7, 2, 5);
    m.onDecision(decision("blow-up", 0.1, 0.05, new GuardFile.Action.Rewind(0),
        new GuardFile.Action.Scale(0.5)));
    m.onLaunch(2, "rewind");
    m.onDecision(decision("flat-validation", 0.05, 0.025, new GuardFile.Action.Scale(0.5)));
    m.onDecision(decision("flat-validation", 0.025, 0.0125, new GuardFile.Action.Scale(0.5)));
    m.onLaunch(3, "crash");
    clock.advanceMillis(4_500);

    String page = registry.scrape();
    assertThat(page).contains("stepwarden_learning_rate{run=\"sensor-net\"} 0.0125")
        .contains("stepwarden_series_last{run=\"sensor-net\",series=\"train\"} 2.25")
        .contains("stepwarden_series_last{run=\"sensor-net\",series=\"validation\"} 2.75")
        // a rewind with a scale is one intervention, as the report counts it
        .contains("stepwarden_interventions_total{action=\"rewind+scale\",guard=\"blow-up\","
            + "run=\"sensor-net\"} 1.0")
        .doesNotContain("action=\"rewind\"")
        .contains("stepwarden_interventions_total{action=\"scale\",guard=\"flat-validation\","
            + "run=\"sensor-net\"} 2.0")
        .contains("stepwarden_rewinds_total{run=\"sensor-net\"} 1.0")
        .contains("stepwarden_restarts_total{run=\"sensor-net\"} 2.0")
        .contains("stepwarden_lines_read_total{run=\"sensor-net\"} 7.0")
        .contains("stepwarden_lines_ignored_total{run=\"sensor-net\"} 5.0")
        // the last metric came at the crash relaunch: its time on the injected clock, in
        // seconds (a timestamp, not an age: Prometheus's naming practice for times)
        .contains("stepwarden_last_metric_timestamp_seconds{run=\"sensor-net\"} "
            + (clock.millis() - 4_500) / 1000.0);
  }

  @Test
  void removesEveryMeterOfTheRunWhenItEndsAndLeavesOtherRunsAlone() {
    RunMeters a = new RunMeters(registry, "a", 0.1, clock);
    RunMeters b = new RunMeters(registry, "b", 0.2, clock);
    a.onSample(new Sample(1, Double.NaN, 0, Map.of("train", 1.0)), 0.1);
    a.onDecision(decision("g", 0.1, 0.05, new GuardFile.Action.Scale(0.5)));
    assertThat(a.meterCount()).isEqualTo(8);

    a.onEnd(null);

    assertThat(a.meterCount()).isZero();
    assertThat(registry.getMeters()).filteredOn(meter -> !meter.getId().getName()
        .equals("stepwarden.build.info")).allSatisfy(meter ->
        assertThat(meter.getId().getTag("run")).isEqualTo("b"));
    assertThat(registry.scrape()).doesNotContain("run=\"a\"")
        .contains("stepwarden_learning_rate{run=\"b\"} 0.2");
    // a late sample from a draining pump must not bring the meters back
    a.onSample(new Sample(2, Double.NaN, 0, Map.of("validation", 1.0)), 0.1);
    assertThat(registry.scrape()).doesNotContain("run=\"a\"");
    b.close();
    assertThat(registry.getMeters()).extracting(meter -> meter.getId().getName())
        .as("only the registry's own build info is left").containsExactly("stepwarden.build.info");
  }

  @Test
  void gaugesKeepReportingAfterGarbageCollection() throws InterruptedException {
    // Micrometer holds gauge state weakly: a gauge on an unreferenced object turns NaN after a
    // GC. The observer keeps its state in fields, so the values must survive.
    RunMeters m = new RunMeters(registry, "gc", 0.3, clock);
    m.onSample(new Sample(1, Double.NaN, 0, Map.of("train", 0.75)), 0.3);
    for (int i = 0; i < 3; i++) {
      System.gc();
      Thread.sleep(20);
    }
    assertThat(registry.scrape()).contains("stepwarden_learning_rate{run=\"gc\"} 0.3")
        .contains("stepwarden_series_last{run=\"gc\",series=\"train\"} 0.75");
    m.close();
  }

  @Test
  void namesActionsAsTheGuardFileSpellsThem() {
    assertThat(RunMeters.actionName(new GuardFile.Action.SetRate(0.1))).isEqualTo("set_rate");
    assertThat(RunMeters.actionName(new GuardFile.Action.GiveUp())).isEqualTo("give_up");
    assertThat(RunMeters.actionName(new GuardFile.Action.Rewind(3))).isEqualTo("rewind");
  }
}
