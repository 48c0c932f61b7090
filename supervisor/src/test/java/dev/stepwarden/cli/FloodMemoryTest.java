package dev.stepwarden.cli;

import static org.assertj.core.api.Assertions.assertThat;

import dev.stepwarden.audit.AuditReader;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.ArrayList;
import java.util.List;
import java.util.Map;
import java.util.concurrent.TimeUnit;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;

/**
 * Hostile output: 40 MB with no newline, 8 MB of binary garbage and three 10 MB lines, then a
 * normal metric. A supervisor JVM capped at a 96 MB heap must get through it (a pump that kept a
 * whole line would need 80 MB of chars for the first one alone), count the oversized lines and
 * still read the metric; its peak resident memory is printed.
 */
class FloodMemoryTest {
  @Test
  void floodsWithoutNewlinesBinaryGarbageAndHugeLinesStayBounded(@TempDir Path tmp)
      throws Exception {
    Path rules = tmp.resolve("r.yaml");
    Files.writeString(rules, "run: { learning_rate: 0.1, stop_grace: 2s }\n"
        + "read: { format: pairs, series: { train: loss } }\n");
    Path runDir = tmp.resolve("run");
    String script = "import sys,os\n"
        + "w=sys.stdout.buffer.write\n"
        + "for _ in range(40): w(b'x'*1000000)\n"
        + "w(b'\\n')\n"
        + "w(os.urandom(8000000)); w(b'\\n')\n"
        + "for _ in range(3): w(b'loss=' + b'9'*10000000 + b'\\n')\n"
        + "w(b'step=1 loss=0.25\\n'); sys.stdout.flush()\n";
    List<String> cmd = new ArrayList<>(List.of(ChildJvm.java(), "-XX:+UseSerialGC", "-Xmx96m",
        "-cp", System.getProperty("java.class.path"), "dev.stepwarden.cli.Main", "run",
        "--rules", rules.toString(), "--run-dir", runDir.toString(), "--quiet", "--",
        "python3", "-c", script));
    Process sup = new ProcessBuilder(cmd).directory(tmp.toFile()).redirectErrorStream(true)
        .redirectOutput(tmp.resolve("out.txt").toFile()).start();
    long peakKb = 0;
    while (!sup.waitFor(100, TimeUnit.MILLISECONDS)) {
      peakKb = Math.max(peakKb, vmHwmKb(sup.pid()));
    }
    String printed = Files.readString(tmp.resolve("out.txt"));
    assertThat(sup.exitValue()).as(printed).isZero();
    assertThat(printed).doesNotContain("OutOfMemoryError");
    Map<String, Object> end = AuditReader.read(runDir.resolve("audit.jsonl")).records().stream()
        .filter(r -> "run-end".equals(r.get("type"))).findFirst().orElseThrow();
    assertThat(((Number) end.get("oversized_lines")).longValue()).isGreaterThanOrEqualTo(4);
    assertThat(((Number) end.get("metric_lines")).longValue()).isGreaterThanOrEqualTo(1);
    assertThat(Files.readString(runDir.resolve("metrics.jsonl"))).contains("\"train\":0.25");
    System.out.println("flood of 78 MB hostile output: supervisor peak RSS " + peakKb / 1024
        + " MB (heap capped at 96 MB), oversized lines " + end.get("oversized_lines"));
  }

  static long vmHwmKb(long pid) {
    try {
      for (String l : Files.readAllLines(Path.of("/proc", Long.toString(pid), "status"))) {
        if (l.startsWith("VmHWM:")) {
          return Long.parseLong(l.replaceAll("[^0-9]", ""));
        }
      }
    } catch (Exception gone) {
      return 0;
    }
    return 0;
  }
}
