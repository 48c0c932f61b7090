package dev.stepwarden.metrics;

import static org.assertj.core.api.Assertions.assertThat;
import static org.assertj.core.api.Assertions.assertThatThrownBy;

import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.nio.file.StandardOpenOption;
import java.time.Duration;
import java.util.ArrayList;
import java.util.List;
import java.util.Map;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;

/** A scenario of our own: training loss on stdout, validation loss in a CSV file. */
class MetricsSourcesTest {
  @TempDir
  Path dir;

  static ReadPlan stdoutWithCsvValidation() {
    ReadPlan val = new ReadPlan(ReadPlan.Source.FILE, Path.of("val.csv"), ReadPlan.Format.CSV,
        null, "step", "epoch", null, Map.of("validation", "val_loss"), 4096, List.of());
    return new ReadPlan(ReadPlan.Source.STDOUT, null, ReadPlan.Format.JSON, null, "step",
        "epoch", "lr", Map.of("train", "loss"), 4096, List.of(val));
  }

  @Test
  void seesTrainingLossOnStdoutAndValidationFromAFollowedCsvFile() throws Exception {
    MetricsSources s = new MetricsSources(stdoutWithCsvValidation());
    List<Sample> samples = new ArrayList<>();
    Object lock = new Object();
    Path csv = dir.resolve("val.csv");
    s.follow(dir, Duration.ofMillis(5), (i, line, cut) -> {
      synchronized (lock) {
        MetricsIntake.Reading r = s.accept(i, line, 0, cut);
        if (r != null && r.sample() != null) {
          samples.add(r.sample());
        }
      }
    });
    try {
      int[] out = s.sourcesOf(ReadPlan.Source.STDOUT);
      assertThat(out).containsExactly(0);
      synchronized (lock) {
        for (int step = 1; step <= 3; step++) {
          samples.add(s.accept(out[0], "{\"step\": " + step + ", \"loss\": " + (1.0 / step)
              + "}", 0, false).sample());
        }
      }
      Files.writeString(csv, "epoch,val_loss\n1,0.75\n", StandardCharsets.UTF_8);
      long deadline = System.nanoTime() + 10_000_000_000L;
      while (System.nanoTime() < deadline) {
        synchronized (lock) {
          if (samples.stream().anyMatch(x -> x.has("validation"))) {
            break;
          }
        }
        Thread.sleep(5);
      }
    } finally {
      s.close();
    }
    synchronized (lock) {
      Sample v = samples.stream().filter(x -> x.has("validation")).findFirst().orElseThrow();
      assertThat(v.value("validation")).isEqualTo(0.75);
      assertThat(v.step()).isEqualTo(3); // no step in the CSV: it lands where training is
      assertThat(v.epoch()).isEqualTo(1.0);
      assertThat(samples.stream().filter(x -> x.has("train")).count()).isEqualTo(3);
    }
  }

  @Test
  void warnsOnceNamingTheMissingKeyTheSourceAndTheKeysSeen() {
    ReadPlan plan = new ReadPlan(ReadPlan.Source.STDOUT, null, ReadPlan.Format.JSON, null,
        "step", "epoch", "lr", Map.of("train", "loss", "validation", "val_loss"));
    MetricsSources s = new MetricsSources(plan);
    for (int i = 0; i < 999; i++) {
      s.accept(0, "{\"step\": " + i + ", \"loss\": 0.5, \"acc\": 0.9}", 0, false);
    }
    assertThat(s.missingKeysWarning(1000)).isEmpty();
    s.accept(0, "{\"step\": 1000, \"loss\": 0.5}", 0, false);
    assertThat(s.missingKeysWarning(1000)).hasValue("series validation: stdout never printed"
        + " key 'val_loss' (1000 lines read); keys it printed: acc, loss, step; fix read.series"
        + " in the guard file (or what the trainer prints)");
    assertThat(s.missingKeysWarning(1000)).isEmpty();
  }

  @Test
  void warnsAfterTwoEpochsOfASourceThatPrintsThemWithTheNearestKey() {
    ReadPlan plan = new ReadPlan(ReadPlan.Source.STDOUT, null, ReadPlan.Format.JSON, null,
        "step", "epoch", "lr", Map.of("train", "loss", "validation", "valid_loss"));
    MetricsSources s = new MetricsSources(plan);
    int step = 0;
    for (int epoch = 1; epoch <= 2; epoch++) {
      for (int i = 0; i < 5; i++) {
        s.accept(0, "{\"epoch\": " + epoch + ", \"step\": " + ++step + ", \"loss\": 0.5}", 0,
            false);
      }
      s.accept(0, "{\"epoch\": " + epoch + ", \"step\": " + step + ", \"val_loss\": 0.6}", 0,
          false);
      assertThat(s.missingKeysWarning(1000)).as("epoch %d", epoch).isEmpty();
    }
    s.accept(0, "{\"epoch\": 3, \"step\": " + ++step + ", \"loss\": 0.5}", 0, false);
    assertThat(s.missingKeysWarning(1000)).hasValue("series validation: stdout never printed"
        + " key 'valid_loss' (did you mean 'val_loss'?) in 3 epochs (13 lines read); keys it"
        + " printed: epoch, loss, step, val_loss; fix read.series in the guard file (or what the"
        + " trainer prints)");
  }

  @Test
  void saysWhenTheFollowedFileDoesNotExist() throws Exception {
    MetricsSources s = new MetricsSources(stdoutWithCsvValidation());
    s.follow(dir, Duration.ofMillis(50), (i, l, c) -> { });
    try {
      s.accept(0, "{\"step\": 1, \"loss\": 0.5}", 0, false);
      assertThat(s.missingKeysWarning(1).orElseThrow()).contains("val.csv")
          .contains("the file does not exist");
    } finally {
      s.close();
    }
  }

  @Test
  void refusesASeriesReadFromTwoSources() {
    ReadPlan val = new ReadPlan(ReadPlan.Source.STDERR, null, ReadPlan.Format.PAIRS, null,
        "step", "epoch", null, Map.of("train", "loss"));
    assertThatThrownBy(() -> new ReadPlan(ReadPlan.Source.STDOUT, null, ReadPlan.Format.JSON,
        null, "step", "epoch", "lr", Map.of("train", "loss"), 4096, List.of(val)))
        .hasMessageContaining("'train' is read from two sources");
  }

  @Test
  void countsIgnoredAndOversizedLinesAcrossSources() {
    MetricsSources s = new MetricsSources(stdoutWithCsvValidation());
    s.accept(0, "Epoch 1/3 ━━━━━━━━ 33%", 0, false);
    s.accept(0, "{\"step\": 1, \"loss\": 0.5, \"pad\": \"xxxx", 0, true);
    s.accept(1, "epoch,val_loss", 0, false);
    s.accept(1, "1,0.4", 0, false);
    assertThat(s.lines()).isEqualTo(4);
    assertThat(s.metricLines()).isEqualTo(2);
    assertThat(s.ignoredLines()).isEqualTo(2);
    assertThat(s.oversizedLines()).isEqualTo(1);
  }
}
