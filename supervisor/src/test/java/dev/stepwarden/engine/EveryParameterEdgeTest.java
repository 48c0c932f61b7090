package dev.stepwarden.engine;

import static org.assertj.core.api.Assertions.assertThat;
import static org.assertj.core.api.Assertions.assertThatThrownBy;

import dev.stepwarden.detectors.DetectorKind;
import dev.stepwarden.detectors.Param;
import dev.stepwarden.metrics.Sample;
import dev.stepwarden.rules.ConfigException;
import dev.stepwarden.rules.Explain;
import dev.stepwarden.rules.GuardFile;
import dev.stepwarden.rules.GuardFiles;
import java.nio.charset.StandardCharsets;
import java.nio.file.Path;
import java.util.ArrayList;
import java.util.List;
import java.util.Map;
import org.junit.jupiter.api.Test;

/**
 * Whatever the loader accepts, the engine builds and {@code check} explains: every numeric
 * parameter of every detector at each edge of its range (the edge itself when closed, the nearest
 * double inside when open), and just outside it the loader refuses with a message.
 */
class EveryParameterEdgeTest {
  static String file(DetectorKind kind, String params) {
    String series = kind == DetectorKind.OVERFITS ? "validation" : kind.defaultSeries();
    String extra = kind == DetectorKind.STUCK_AT_CHANCE && !params.contains("classes")
        ? (params.isEmpty() ? "classes: 10" : ", classes: 10") : "";
    return "run:\n  learning_rate: 0.1\nguards:\n  - name: g\n    when: { " + kind.key()
        + ": { series: " + series + (params.isEmpty() && extra.isEmpty() ? "" : ", ")
        + params + extra + " } }\n    do: { scale: 0.5 }\n";
  }

  static GuardFile load(String yaml) throws ConfigException {
    return GuardFiles.parse(yaml.getBytes(StandardCharsets.UTF_8), Path.of("edge.yaml"));
  }

  static List<double[]> edges(Param p) {
    double lo = p.minOpen() ? Math.nextUp(p.min()) : p.min();
    double hi = p.maxOpen() ? Math.nextDown(p.max()) : p.max();
    double below = p.kind() == Param.Kind.INTEGER ? p.min() - 1
        : p.minOpen() ? p.min() : Math.nextDown(p.min());
    double above = p.kind() == Param.Kind.INTEGER ? p.max() + 1
        : p.maxOpen() ? p.max() : Math.nextUp(p.max());
    return List.of(new double[] {lo, hi}, new double[] {below, above});
  }

  static String text(Param p, double v) {
    return p.kind() == Param.Kind.INTEGER ? Long.toString((long) v) : Double.toString(v);
  }

  @Test
  void everyDetectorBuildsExplainsAndRunsAtEveryEdgeTheLoaderAccepts() throws Exception {
    List<String> tried = new ArrayList<>();
    for (DetectorKind kind : DetectorKind.values()) {
      for (Param p : kind.params()) {
        if (p.kind() == Param.Kind.CHOICE) {
          for (String c : p.choices()) {
            armAndRun(load(file(kind, p.name() + ": " + c)));
          }
          continue;
        }
        List<String> others = kind == DetectorKind.OVERFITS && p.name().equals("above")
            ? List.of("criterion: GL", "criterion: PQ") : List.of("");
        for (String other : others) {
          for (double v : edges(p).get(0)) {
            String params = p.name() + ": " + text(p, v) + (other.isEmpty() ? "" : ", " + other);
            GuardFile f = load(file(kind, params));
            armAndRun(f);
            tried.add(kind.key() + "." + params);
          }
          for (double v : edges(p).get(1)) {
            String params = p.name() + ": " + text(p, v) + (other.isEmpty() ? "" : ", " + other);
            assertThatThrownBy(() -> load(file(kind, params)))
                .as(kind.key() + "." + params).isInstanceOf(ConfigException.class)
                .hasMessageContaining(p.name());
          }
        }
      }
    }
    // UP counts strips: whole numbers 1..1000 load, a fraction is refused by the loader
    armAndRun(load(file(DetectorKind.OVERFITS, "criterion: UP, above: 1")));
    armAndRun(load(file(DetectorKind.OVERFITS, "criterion: UP, above: 1000")));
    assertThatThrownBy(() -> load(file(DetectorKind.OVERFITS, "criterion: UP, above: 2.5")))
        .isInstanceOf(ConfigException.class).hasMessageContaining("whole number");
    armAndRun(load(file(DetectorKind.OVERFITS, "")));
    assertThat(tried).hasSizeGreaterThan(40);
  }

  /** The edges the issue found refused by run and replay after check had accepted them. */
  @Test
  void theEdgesThatUsedToFailAfterCheckNowWork() throws Exception {
    for (String s : List.of("climbs: { over: 200 }", "wobbles: { over: 8 }",
        "flattens: { p_below: 4.9E-324 }", "overfits: { above: 4.9E-324 }",
        "overfits: { strip: 2 }", "overfits: { strip: 1000 }", "overfits: {}")) {
      armAndRun(load("run:\n  learning_rate: 0.1\nguards:\n  - name: g\n    when: { " + s
          + " }\n    do: { scale: 0.5 }\n"));
    }
  }

  static void armAndRun(GuardFile f) {
    assertThat(Explain.describe(f)).isNotEmpty();
    GuardEngine e = new GuardEngine(f);
    for (int i = 0; i < 30; i++) {
      e.onSample(new Sample(i, Double.NaN, i, Map.of("train", 2.0 / (1 + i),
          "validation", 2.5 / (1 + i))));
    }
  }
}
