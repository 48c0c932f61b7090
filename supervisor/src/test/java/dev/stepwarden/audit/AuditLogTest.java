package dev.stepwarden.audit;

import static org.assertj.core.api.Assertions.assertThat;

import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.nio.file.StandardOpenOption;
import java.time.Clock;
import java.time.Instant;
import java.time.ZoneOffset;
import java.util.Map;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;

class AuditLogTest {
  @Test
  void recordsAreNumberedTimestampedAndReadBack(@TempDir Path tmp) throws Exception {
    Clock clock = Clock.fixed(Instant.parse("2026-12-01T03:00:00Z"), ZoneOffset.UTC);
    Path p = tmp.resolve("audit.jsonl");
    try (AuditLog log = AuditLog.open(p, clock)) {
      assertThat(log.append("decision", Map.of("guard", "flat", "rate_after", 0.05))).isEqualTo(1);
      assertThat(log.append("outcome", Map.of("decision_seq", 1))).isEqualTo(2);
    }
    AuditReader.Contents c = AuditReader.read(p);
    assertThat(c.records()).hasSize(2);
    assertThat(c.records().get(0)).containsEntry("seq", 1).containsEntry("type", "decision")
        .containsEntry("at", "2026-12-01T03:00:00Z").containsEntry("guard", "flat");
    assertThat(c.tornLastLine()).isFalse();
  }

  @Test
  void aReopenedLogContinuesTheSequence(@TempDir Path tmp) throws Exception {
    Path p = tmp.resolve("audit.jsonl");
    try (AuditLog log = AuditLog.open(p, Clock.systemUTC())) {
      log.append("run-start", Map.of());
    }
    try (AuditLog log = AuditLog.open(p, Clock.systemUTC())) {
      assertThat(log.append("run-end", Map.of())).isEqualTo(2);
    }
  }

  @Test
  void aTornLastLineIsReportedAndLeftOut(@TempDir Path tmp) throws Exception {
    Path p = tmp.resolve("audit.jsonl");
    try (AuditLog log = AuditLog.open(p, Clock.systemUTC())) {
      log.append("decision", Map.of("guard", "g"));
    }
    Files.write(p, "{\"seq\":2,\"type\":\"outc".getBytes(StandardCharsets.UTF_8),
        StandardOpenOption.APPEND);
    AuditReader.Contents c = AuditReader.read(p);
    assertThat(c.tornLastLine()).isTrue();
    assertThat(c.records()).hasSize(1);
    assertThat(c.badLines()).isEmpty();
    // and a writer reopening it still continues after the last whole record
    try (AuditLog log = AuditLog.open(p, Clock.systemUTC())) {
      assertThat(log.append("x", Map.of())).isEqualTo(2);
    }
  }

  @Test
  void aDamagedLineInTheMiddleIsReportedByNumber(@TempDir Path tmp) throws Exception {
    Path p = tmp.resolve("audit.jsonl");
    Files.writeString(p, "{\"seq\":1}\nnot json\n{\"seq\":3}\n");
    AuditReader.Contents c = AuditReader.read(p);
    assertThat(c.badLines()).containsExactly(2);
    assertThat(c.records()).hasSize(2);
  }
}
