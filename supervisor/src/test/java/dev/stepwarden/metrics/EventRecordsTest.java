package dev.stepwarden.metrics;

import static org.assertj.core.api.Assertions.assertThat;

import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.time.Duration;
import java.util.ArrayList;
import java.util.Arrays;
import java.util.List;
import java.util.Map;
import java.util.zip.CRC32C;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;
import tools.jackson.databind.JsonNode;
import tools.jackson.databind.json.JsonMapper;

/**
 * The event-file reader against a file written by general-purpose libraries from the published
 * layouts ({@code make_reference_events.py} beside it: Google's protocol-buffer runtime and
 * crcmod's CRC-32C) and against the CRC-32C check value of RFC 3720, B.4.
 */
class EventRecordsTest {
  private static final Path REFERENCE =
      Path.of("src/test/resources/events/events.out.tfevents.1790000000.reference");
  private static final JsonMapper JSON = JsonMapper.builder().build();

  @TempDir
  Path tmp;

  @Test
  void crc32cOfTheCheckStringIsTheValueOfRfc3720() {
    CRC32C c = new CRC32C();
    c.update("123456789".getBytes(StandardCharsets.US_ASCII));
    assertThat(c.getValue()).isEqualTo(0xE3069283L); // RFC 3720, B.4
  }

  /** (step, tag, value) per scalar, in file order. */
  private static List<Object[]> scalars(List<String> lines) {
    List<Object[]> out = new ArrayList<>();
    for (String l : lines) {
      JsonNode n = JSON.readTree(l);
      for (Map.Entry<String, JsonNode> f : new ArrayList<>(n.properties())) {
        if (!f.getKey().equals("step")) {
          out.add(new Object[] {n.get("step").asLong(), f.getKey(), f.getValue().asDouble()});
        }
      }
    }
    return out;
  }

  @Test
  void everyScalarOfTheReferenceFileIsReadWithItsTagStepAndValue() throws Exception {
    List<String> lines = new ArrayList<>();
    EventRecords r = new EventRecords("step");
    byte[] b = Files.readAllBytes(REFERENCE);
    assertThat(r.read(b, 0, b.length, lines::add)).isEqualTo(b.length);
    assertThat(r.records()).isEqualTo(301); // the file-version record and 300 events
    assertThat(r.corruptRecords()).isZero();
    List<Object[]> got = scalars(lines);
    List<String> expected = Files.readAllLines(Path.of(REFERENCE + ".expected.tsv"));
    assertThat(got).hasSameSizeAs(expected).hasSize(350);
    for (int i = 0; i < expected.size(); i++) {
      String[] e = expected.get(i).split("\t");
      Object[] g = got.get(i);
      assertThat(g[0]).as(expected.get(i)).isEqualTo(Long.parseLong(e[0]));
      assertThat(g[1]).as(expected.get(i)).isEqualTo(e[1]);
      double want = Double.parseDouble(e[2]);
      if (e[1].equals("lr")) {
        assertThat((double) g[2]).isEqualTo(want); // a double tensor: exact
      } else {
        assertThat((float) (double) g[2]).as(expected.get(i)).isEqualTo((float) want);
      }
    }
  }

  @Test
  void aFollowedFileThatGrowsInOddPiecesGivesEveryEventOnceAndNoTornOne() throws Exception {
    byte[] b = Files.readAllBytes(REFERENCE);
    List<String> whole = new ArrayList<>();
    EventFileFollower.readAll(REFERENCE, "step", whole::add);
    Path grow = tmp.resolve("events.out.tfevents.1.host");
    List<String> got = new ArrayList<>();
    EventFileFollower f = new EventFileFollower(grow, Duration.ofMillis(10), "step", got::add);
    assertThat(f.poll()).isZero(); // not there yet
    Files.write(grow, new byte[0]);
    for (int at = 0; at < b.length; at += 777) {
      Files.write(grow, Arrays.copyOfRange(b, at, Math.min(b.length, at + 777)),
          java.nio.file.StandardOpenOption.APPEND);
      f.poll();
      assertThat(whole).startsWith(got.toArray(new String[0]));
    }
    assertThat(got).isEqualTo(whole);
    assertThat(f.corruptRecords()).isZero();
  }

  @Test
  void aDamagedRecordIsPassedOverAndADamagedHeaderIsSkippedToTheNextRecord() throws Exception {
    byte[] b = Files.readAllBytes(REFERENCE);
    List<String> whole = new ArrayList<>();
    new EventRecords("step").read(b, 0, b.length, whole::add);
    int first = 12 + (int) EventRecords.le64(b, 0) + 4; // the first event after file_version
    byte[] data = b.clone();
    data[first + 20] ^= 0x40; // inside the first event's data
    List<String> got = new ArrayList<>();
    EventRecords r = new EventRecords("step");
    r.read(data, 0, data.length, got::add);
    assertThat(r.corruptRecords()).isEqualTo(1);
    assertThat(got).isEqualTo(whole.subList(1, whole.size()));
    byte[] header = b.clone();
    header[first + 2] ^= 0x01; // the first event's length
    got.clear();
    r = new EventRecords("step");
    r.read(header, 0, header.length, got::add);
    assertThat(r.corruptRecords()).isEqualTo(1);
    assertThat(got).isEqualTo(whole.subList(1, whole.size()));
  }

  @Test
  void inAFolderTheNewestEventFileIsFollowedAfterTheOlderIsReadToItsEnd() throws Exception {
    byte[] b = Files.readAllBytes(REFERENCE);
    int cut = 12 + (int) EventRecords.le64(b, 0) + 4;
    int second = cut + 12 + (int) EventRecords.le64(b, cut) + 4;
    Path old = tmp.resolve("events.out.tfevents.100.host");
    Files.write(old, Arrays.copyOfRange(b, 0, second)); // file_version and one event
    Files.setLastModifiedTime(old, java.nio.file.attribute.FileTime.fromMillis(1_000_000));
    Files.writeString(tmp.resolve("notes.txt"), "not an event file");
    List<String> got = new ArrayList<>();
    EventFileFollower f = new EventFileFollower(tmp, Duration.ofMillis(10), "step", got::add);
    assertThat(f.poll()).isEqualTo(1);
    Path newer = tmp.resolve("events.out.tfevents.200.host");
    Files.write(newer, b); // a restarted writer: the whole reference
    assertThat(f.poll()).isEqualTo(300);
    assertThat(got).hasSize(301);
  }

  @Test
  void aRunsTfrecordSourceFollowsTheFolderItsWriterWritesTo() throws Exception {
    Path logs = Files.createDirectories(tmp.resolve("logs"));
    ReadPlan plan = new ReadPlan(ReadPlan.Source.FILE, Path.of("logs"), ReadPlan.Format.TFRECORD,
        null, "step", "epoch", "lr", Map.of("train", "loss", "validation", "val_loss"));
    List<Sample> samples = new java.util.concurrent.CopyOnWriteArrayList<>();
    try (MetricsSources sources = new MetricsSources(plan)) {
      sources.follow(tmp, Duration.ofMillis(20), (i, line, cut) -> {
        synchronized (sources) {
          MetricsIntake.Reading r = sources.accept(i, line, 0, cut);
          if (r != null && r.sample() != null) {
            samples.add(r.sample());
          }
        }
      });
      Files.copy(REFERENCE, logs.resolve("events.out.tfevents.1790000000.node1"));
      long end = System.nanoTime() + 60_000_000_000L; // generous: a loaded machine
      while (samples.size() < 300 && System.nanoTime() < end) {
        Thread.sleep(20);
      }
    }
    assertThat(samples).hasSize(300);
    assertThat(samples.get(0).step()).isEqualTo(1);
    assertThat(samples.get(samples.size() - 1).step()).isEqualTo(250);
    assertThat(samples.stream().filter(x -> x.has("validation")).count()).isEqualTo(50);
  }
}
