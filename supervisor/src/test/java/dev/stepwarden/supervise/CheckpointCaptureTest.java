package dev.stepwarden.supervise;

import static dev.stepwarden.supervise.Night.ofType;
import static org.assertj.core.api.Assertions.assertThat;

import dev.stepwarden.rules.GuardFile;
import dev.stepwarden.rules.GuardFiles;
import java.io.ByteArrayOutputStream;
import java.io.PrintStream;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.List;
import java.util.Map;
import java.util.concurrent.ExecutorService;
import java.util.concurrent.Executors;
import java.util.concurrent.Future;
import java.util.concurrent.TimeUnit;
import java.util.stream.Stream;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;

/**
 * Checkpoints written slowly (4 chunks, 1 s apart, as a large file on network storage arrives),
 * end to end through the supervisor with a real Python trainer: no vault copy is ever a partial
 * file; and two runs started at once in one folder with the same glob never take each other's.
 */
class CheckpointCaptureTest {
  @TempDir Path tmp;

  /** Prints a few steps, then writes checkpoint ckpt/model-TAG-K.pt in 4 chunks 1 s apart. */
  private static final String SAVER = String.join("\n",
      "import json, sys, time",
      "tag, saves = sys.argv[1], int(sys.argv[2])",
      "step = 0",
      "for k in range(1, saves + 1):",
      "    for _ in range(5):",
      "        step += 1",
      "        print(json.dumps({'step': step, 'loss': 1.0 / step}), flush=True)",
      "        time.sleep(0.05)",
      "    with open('ckpt/model-%s-%d.pt' % (tag, k), 'wb') as f:",
      "        f.write(('TAG:%s;STEP:%d;' % (tag, step)).encode())",
      "        for chunk in range(4):",
      "            f.write(b'x' * 65536)",
      "            f.flush()",
      "            time.sleep(1.0)",
      "        f.write(b';END')",
      "print(json.dumps({'step': step + 1, 'loss': 0.01}), flush=True)",
      "");

  private GuardFile rules(Path work, String tag, int saves) throws Exception {
    Path f = work.resolve("guards-" + tag + ".yaml");
    Files.writeString(f, "run:\n  name: saver-" + tag + "\n  workdir: " + work + "\n"
        + "  learning_rate: 0.1\n  stop_grace: 2s\n"
        + "  command: [python3, -u, saver.py, " + tag + ", \"" + saves + "\"]\n"
        + "read:\n  from: stdout\n  format: json\n  step: step\n  series: { train: loss }\n"
        + "checkpoints: { watch: ckpt/*.pt, keep: 10 }\n"
        + "limits:\n  learning_rate: { min: 1.0e-6, max: 1.0 }\n");
    return GuardFiles.load(f);
  }

  private static Supervisor.Result run(GuardFile g, Path runDir) throws Exception {
    ByteArrayOutputStream console = new ByteArrayOutputStream();
    try {
      return new Supervisor(g, new RunOptions(runDir, true, null,
          new PrintStream(console, true, StandardCharsets.UTF_8)).withCopyVault(true)).run();
    } finally {
      Files.write(runDir.resolveSibling(runDir.getFileName() + ".console"), console.toByteArray());
    }
  }

  /** The first bytes of a checkpoint: its tag and step, without the payload. */
  private static String head(Path p) throws Exception {
    String s = Files.readString(p, StandardCharsets.ISO_8859_1);
    return s.substring(0, Math.max(0, s.indexOf('x')));
  }

  private Path work() throws Exception {
    Path work = Files.createDirectories(tmp.resolve("work"));
    Files.createDirectories(work.resolve("ckpt"));
    Files.writeString(work.resolve("saver.py"), SAVER);
    return work;
  }

  private static List<Path> vault(Path runDir) throws Exception {
    try (Stream<Path> s = Files.list(runDir.resolve(RunDirectory.VAULT))) {
      return s.filter(p -> !p.getFileName().toString().startsWith(".")).sorted().toList();
    }
  }

  @Test
  void slowChunkedWritesInCopyModeNeverLeaveAHalfWrittenVaultCopy() throws Exception {
    Path work = work();
    Path runDir = tmp.resolve("run");
    Supervisor.Result r = run(rules(work, "A", 2), runDir);
    assertThat(r.outcome()).isEqualTo(RunOutcome.FINISHED);
    List<Path> kept = vault(runDir);
    assertThat(kept).hasSize(2);
    for (Path v : kept) {
      String content = Files.readString(v, StandardCharsets.ISO_8859_1);
      assertThat(head(v)).as(v.toString()).startsWith("TAG:A;");
      assertThat(content.endsWith(";END")).as("%s ends whole", v).isTrue();
      assertThat(content.length()).as(v.toString()).isEqualTo(head(v).length() + 4 * 65536 + 4);
    }
    List<Map<String, Object>> ckpt = ofType(Night.audit(runDir), "checkpoint");
    assertThat(ckpt).hasSize(2);
    for (Map<String, Object> c : ckpt) {
      assertThat(c.get("vault_by")).isEqualTo("copy");
      // The step at which the file appeared: the trainer printed steps 5 and 10 before saving
      // (a line still in the pipe when the file is first seen may leave it a step or so short,
      // never at a later save's step).
      String name = Path.of((String) c.get("path")).getFileName().toString();
      long expected = name.endsWith("-1.pt") ? 5 : 10;
      assertThat(((Number) c.get("step")).longValue()).as(name)
          .isBetween(expected - 4, expected);
      assertThat(c.get("step_from")).isEqualTo("trainer's step when the file appeared");
    }
  }

  @Test
  void twoRunsStartedAtOnceInOneFolderWithOneGlobNeverTakeEachOthersCheckpoints()
      throws Exception {
    Path work = work();
    ExecutorService pool = Executors.newFixedThreadPool(2);
    try {
      Future<Supervisor.Result> a = pool.submit(() -> run(rules(work, "A", 2),
          tmp.resolve("run-A")));
      Future<Supervisor.Result> b = pool.submit(() -> run(rules(work, "B", 2),
          tmp.resolve("run-B")));
      assertThat(a.get(120, TimeUnit.SECONDS).outcome()).isEqualTo(RunOutcome.FINISHED);
      assertThat(b.get(120, TimeUnit.SECONDS).outcome()).isEqualTo(RunOutcome.FINISHED);
    } finally {
      pool.shutdownNow();
    }
    for (String tag : List.of("A", "B")) {
      Path runDir = tmp.resolve("run-" + tag);
      List<Path> kept = vault(runDir);
      assertThat(kept).as("run %s took its own checkpoints", tag).isNotEmpty();
      for (Path v : kept) {
        assertThat(head(v)).as("%s in run %s; console: %s; audit: %s", v.getFileName(), tag,
            Files.readString(tmp.resolve("run-" + tag + ".console")),
            Files.readString(runDir.resolve(RunDirectory.AUDIT)))
            .startsWith("TAG:" + tag + ";");
      }
      assertThat(ofType(Night.audit(runDir), "checkpoint")).allSatisfy(c ->
          assertThat((String) c.get("path")).contains("model-" + tag + "-"));
    }
  }
}
