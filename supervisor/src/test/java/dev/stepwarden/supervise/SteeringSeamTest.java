package dev.stepwarden.supervise;

import static org.assertj.core.api.Assertions.assertThat;

import dev.stepwarden.audit.AuditLog;
import dev.stepwarden.audit.AuditReader;
import dev.stepwarden.control.ControlFile;
import dev.stepwarden.metrics.MetricsIntake;
import dev.stepwarden.metrics.Sample;
import dev.stepwarden.rules.GuardFile;
import dev.stepwarden.telemetry.MutableClock;
import java.nio.file.Files;
import java.nio.file.Path;
import java.time.Duration;
import java.util.List;
import java.util.Map;
import java.util.Optional;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;
import tools.jackson.databind.JsonNode;
import tools.jackson.databind.json.JsonMapper;

/**
 * Steering on its own seam: the control file and the audit log on disk, time from a test clock,
 * readings made by hand (no trainer process). The time-outs are exact because the clock only
 * moves when the test moves it.
 */
class SteeringSeamTest {
  private static final JsonMapper JSON = JsonMapper.builder().build();
  private static final Duration WITHIN = Duration.ofSeconds(30);

  @TempDir
  Path tmp;

  private final MutableClock clock = new MutableClock(1_000_000);

  private Steering steering(boolean restartWhenUnconfirmed) throws Exception {
    AuditLog audit = AuditLog.open(tmp.resolve("audit.jsonl"), clock);
    return new Steering(new ControlFile(tmp.resolve("control.json"), 0),
        new GuardFile.Steer(GuardFile.Steer.Method.CONTROL_FILE, WITHIN, restartWhenUnconfirmed),
        audit, clock);
  }

  private static MetricsIntake.Reading line(long step, double lr, long applied) {
    return new MetricsIntake.Reading(new Sample(step, Double.NaN, 0, Map.of("train", 1.0)), lr,
        applied);
  }

  private List<Map<String, Object>> audit() throws Exception {
    return AuditReader.read(tmp.resolve("audit.jsonl")).records();
  }

  @Test
  void everyLaunchPublishesANewRevisionOnDiskBeforeTheTrainerStarts() throws Exception {
    Steering s = steering(false);
    long first = s.beforeLaunch(0.1, 1, -1, null, false);
    long second = s.beforeLaunch(0.05, 2, 40, 7L, false);

    assertThat(second).isEqualTo(first + 1);
    JsonNode file = JSON.readTree(Files.readString(tmp.resolve("control.json")));
    assertThat(file.path("revision").asLong()).isEqualTo(second);
    assertThat(file.path("learning_rate").asDouble()).isEqualTo(0.05);
    assertThat(file.path("guard").asString()).isEqualTo("(launch 2)");
  }

  @Test
  void aLaunchIsConfirmedByItsAppliedRevisionAndItsClockStartsAtTheFirstMetric()
      throws Exception {
    Steering s = steering(true);
    long rev = s.beforeLaunch(0.05, 2, 40, 7L, false);
    clock.advanceMillis(120_000); // a slow start-up is not the trainer's fault
    assertThat(s.checkTimeOut()).isEmpty();
    assertThat(s.onReading(line(41, Double.NaN, rev), clock.millis())).isTrue();

    Map<String, Object> c = audit().get(0);
    assertThat(c.get("type")).isEqualTo("confirmed");
    assertThat(c.get("for")).isEqualTo("launch 2");
    assertThat(c.get("by")).isEqualTo("applied_revision");
    assertThat(((Number) c.get("decision_seq")).longValue()).isEqualTo(7);
    assertThat(((Number) c.get("after_ms")).longValue()).isZero();
  }

  @Test
  void aLaunchReportingAnotherRateIsNotConfirmedAndBothRatesAreNamed() throws Exception {
    Steering s = steering(true);
    s.beforeLaunch(0.05, 2, 40, 7L, false);
    assertThat(s.onReading(line(41, 0.1, -1), clock.millis())).isFalse();
    clock.advanceMillis(WITHIN.toMillis());
    assertThat(s.checkTimeOut()).isEmpty(); // exactly the limit: still in time
    clock.advanceMillis(1);
    Optional<Steering.Unconfirmed> u = s.checkTimeOut();

    assertThat(u).isPresent();
    assertThat(u.get().restart()).isTrue();
    assertThat(u.get().decisionSeq()).isEqualTo(7L);
    Map<String, Object> n = audit().get(0);
    assertThat(n.get("type")).isEqualTo("not-confirmed");
    assertThat(n.get("learning_rate")).isEqualTo(0.05);
    assertThat(n.get("reported_rate")).isEqualTo(0.1);
    assertThat(n.get("fallback")).isEqualTo("restart");
    assertThat(s.checkTimeOut()).isEmpty(); // recorded once
  }

  @Test
  void theRestartThatWasItselfTheFallbackIsNotRestartedAgain() throws Exception {
    Steering s = steering(true);
    s.beforeLaunch(0.05, 3, 40, null, true);
    s.onReading(line(41, 0.1, -1), clock.millis());
    clock.advanceMillis(WITHIN.toMillis() + 1);

    assertThat(s.checkTimeOut().get().restart()).isFalse();
    assertThat(audit().get(0).get("fallback")).isEqualTo("none");
  }

  @Test
  void aTrainerThatReportsNoRateIsNotRestartedOverItsLaunch() throws Exception {
    Steering s = steering(true);
    s.beforeLaunch(0.05, 2, 40, null, false);
    s.onReading(line(41, Double.NaN, -1), clock.millis());
    clock.advanceMillis(WITHIN.toMillis() + 1);

    Steering.Unconfirmed u = s.checkTimeOut().orElseThrow();
    assertThat(u.restart()).isFalse();
    assertThat(audit().get(0).get("reported_rate")).isNull();
  }

  @Test
  void aLiveChangeIsConfirmedByTheReportedRateWithinPrintingTolerance() throws Exception {
    Steering s = steering(false);
    s.beforeLaunch(0.1, 1, -1, null, false);
    s.onReading(line(1, 0.1, -1), clock.millis());
    dev.stepwarden.engine.Decision d = decision(0.1, 0.025);
    s.liveChange(d, 5);
    clock.advanceMillis(2_000);
    // Printed with six significant digits: 0.0250000 vs 0.025 (common practice of loggers).
    assertThat(s.onReading(line(60, 0.0250000001, -1), clock.millis())).isTrue();

    List<Map<String, Object>> a = audit();
    assertThat(a).extracting(r -> r.get("type"))
        .containsExactly("confirmed", "outcome", "confirmed");
    assertThat(a.get(2).get("for")).isEqualTo("live change");
    assertThat(((Number) a.get(2).get("after_ms")).longValue()).isEqualTo(2_000);
  }

  @Test
  void aGenerationThatEndedIsNotConfirmedAnyMore() throws Exception {
    Steering s = steering(true);
    s.beforeLaunch(0.05, 2, 40, null, false);
    s.forget();
    clock.advanceMillis(WITHIN.toMillis() * 10);

    assertThat(s.checkTimeOut()).isEmpty();
    assertThat(audit()).isEmpty();
  }

  private static dev.stepwarden.engine.Decision decision(double before, double after) {
    return new dev.stepwarden.engine.Decision("flat", 59, 0,
        new dev.stepwarden.detectors.Evidence("plateau", "validation flat", Map.of()),
        List.of(new GuardFile.Action.Scale(after / before)), before, after,
        dev.stepwarden.engine.Decision.Ending.CONTINUE, "");
  }
}
