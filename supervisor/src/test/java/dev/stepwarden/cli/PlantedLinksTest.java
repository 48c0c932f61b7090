package dev.stepwarden.cli;

import static org.assertj.core.api.Assertions.assertThat;

import java.io.PrintWriter;
import java.io.StringWriter;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.List;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;
import org.junit.jupiter.params.ParameterizedTest;
import org.junit.jupiter.params.provider.ValueSource;

/**
 * Links planted in a run directory before the run (by another user sharing the folder, or a
 * leftover) never lead a write of the run to another file: the run is refused (exit 2) naming
 * the entry, and every link target keeps its bytes.
 */
class PlantedLinksTest {
  @TempDir Path tmp;

  private Path rules() throws Exception {
    Files.writeString(tmp.resolve("t.py"), "print('step=1 loss=1.0', flush=True)\n");
    Path rules = tmp.resolve("guards.yaml");
    Files.writeString(rules, "run:\n  name: links\n  learning_rate: 0.1\n"
        + "  workdir: " + tmp + "\n  command: [python3, -u, t.py]\n"
        + "read:\n  format: pairs\n  series: { train: loss }\n"
        + "checkpoints: { watch: ckpt/*.pt }\n"
        + "limits:\n  learning_rate: { min: 1.0e-6, max: 1.0 }\n");
    return rules;
  }

  private static int run(String... args) {
    StringWriter err = new StringWriter();
    int code = Main.execute(args, new PrintWriter(new StringWriter()), new PrintWriter(err));
    lastErr = err.toString();
    return code;
  }

  private static String lastErr;

  @Test
  void aFreshRunDirWithLinksForItsFilesIsRefusedAndTheTargetsStayUnchanged() throws Exception {
    Path rules = rules();
    Path runDir = Files.createDirectory(tmp.resolve("run"));
    List<String> names = List.of("guards.yaml", "command.json", "metrics.jsonl",
        "trainer.stdout.log");
    for (String n : names) {
      Path target = tmp.resolve("precious-" + n);
      Files.writeString(target, "the user's " + n);
      Files.createSymbolicLink(runDir.resolve(n), target);
    }
    assertThat(run("run", "--rules", rules.toString(), "--run-dir", runDir.toString(), "-q"))
        .as(lastErr).isEqualTo(ExitCodes.USAGE);
    assertThat(lastErr).contains("is a symbolic link").contains(runDir.toString());
    for (String n : names) {
      assertThat(Files.readString(tmp.resolve("precious-" + n))).isEqualTo("the user's " + n);
    }
  }

  @ParameterizedTest(name = "{0}")
  @ValueSource(strings = {"guards.yaml", "command.json", "metrics.jsonl", "trainer.stdout.log",
      "audit.jsonl", "vault"})
  void eachPlantedLinkAloneIsRefusedNamingItsEntry(String name) throws Exception {
    Path rules = rules();
    Path runDir = Files.createDirectory(tmp.resolve("run"));
    Path target = name.equals("vault") ? Files.createDirectory(tmp.resolve("elsewhere"))
        : tmp.resolve("precious");
    if (!name.equals("vault")) {
      Files.writeString(target, "keep");
    }
    Files.createSymbolicLink(runDir.resolve(name), target);
    int code = run("run", "--rules", rules.toString(), "--run-dir", runDir.toString(), "-q");
    assertThat(code).as(lastErr).isEqualTo(ExitCodes.USAGE);
    assertThat(lastErr).contains(runDir.resolve(name).toString());
    if (name.equals("vault")) {
      try (var s = Files.list(target)) {
        assertThat(s).isEmpty();
      }
    } else {
      assertThat(Files.readString(target)).isEqualTo("keep");
    }
  }

  @Test
  void aHardLinkPlantedForTheAuditIsRefusedOnResume() throws Exception {
    Path rules = rules();
    Path runDir = tmp.resolve("run");
    assertThat(run("run", "--rules", rules.toString(), "--run-dir", runDir.toString(), "-q"))
        .as(lastErr).isEqualTo(ExitCodes.OK);
    Path audit = runDir.resolve("audit.jsonl");
    Path target = tmp.resolve("precious.log");
    Files.writeString(target, "line one\nhalf a line");
    Files.delete(audit);
    Files.createLink(audit, target);
    Files.writeString(runDir.resolve("state.json"),
        Files.readString(runDir.resolve("state.json")).replace("\"ended\" : true",
            "\"ended\" : false"));
    int code = run("run", "--resume", runDir.toString(), "-q");
    assertThat(code).as(lastErr).isEqualTo(ExitCodes.USAGE);
    assertThat(lastErr).contains("hard link");
    assertThat(Files.readString(target)).isEqualTo("line one\nhalf a line");
  }
}
