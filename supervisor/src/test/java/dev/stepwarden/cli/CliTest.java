package dev.stepwarden.cli;

import static org.assertj.core.api.Assertions.assertThat;

import java.io.PrintWriter;
import java.io.StringWriter;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.Map;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;
import tools.jackson.core.type.TypeReference;
import tools.jackson.databind.json.JsonMapper;

class CliTest {
  record Out(int code, String out, String err) {}

  static Out run(String... args) {
    StringWriter o = new StringWriter();
    StringWriter e = new StringWriter();
    int code = Main.execute(args, new PrintWriter(o, true), new PrintWriter(e, true));
    return new Out(code, o.toString(), e.toString());
  }

  @Test
  void helpListsSubcommandsAndExitCodes() {
    Out r = run("--help");
    assertThat(r.code()).isZero();
    assertThat(r.out()).contains("run", "check", "schema", "demo", "completion")
        .contains("Exit codes:").contains("78").contains("stopped early");
  }

  @Test
  void checkExplainsAValidFileAndRefusesAMisspeltKeyWithExit78(@TempDir Path tmp)
      throws Exception {
    Path good = tmp.resolve("good.yaml");
    Files.writeString(good, GuardFilesSketch.TEXT);
    Out ok = run("check", good.toString());
    assertThat(ok.code()).as(ok.err()).isZero();
    assertThat(ok.out()).contains("valid").contains("'flat-validation': when the best"
        + " validation has not improved by 0.5 %");
    Path bad = tmp.resolve("bad.yaml");
    Files.writeString(bad, GuardFilesSketch.TEXT.replace("then_wait", "then_wiat"));
    Out no = run("check", bad.toString());
    assertThat(no.code()).isEqualTo(ExitCodes.CONFIG);
    assertThat(no.err()).contains(bad + ":").contains("did you mean 'then_wait'?")
        .doesNotContain("Exception");
  }

  @Test
  void unknownOptionIsAUsageError() {
    Out r = run("run", "--rules", "r.yaml", "--quite", "--", "python3", "train.py");
    assertThat(r.code()).isEqualTo(ExitCodes.USAGE);
    assertThat(r.err()).containsIgnoringCase("unknown option").contains("'--quite'");
  }

  @Test
  void schemaIsJsonThatNamesEveryTopLevelSectionAndDetector() {
    Out r = run("schema");
    assertThat(r.code()).isZero();
    Map<String, Object> schema = JsonMapper.builder().build().readValue(r.out(),
        new TypeReference<Map<String, Object>>() {});
    assertThat(schema).containsEntry("additionalProperties", false);
    assertThat(r.out()).contains("\"flattens\"", "\"rises\"", "\"creeps\"", "\"overfits\"",
        "\"then_wait\"", "\"crash_restarts\"", "\"confirm_within\"");
  }

  @Test
  void everySubcommandAnswersHelpWithItsOwnUsage() {
    for (String name : new String[] {"run", "check", "schema", "demo", "report", "replay",
        "queue", "serve", "helper", "completion"}) {
      Out r = run(name, "--help");
      assertThat(r.code()).as(name + ": " + r.err()).isZero();
      assertThat(r.out()).as(name).startsWith("Usage: stepwarden " + name);
    }
    Out nested = run("queue", "add", "--help");
    assertThat(nested.code()).as(nested.err()).isZero();
    assertThat(nested.out()).startsWith("Usage: stepwarden queue add");
    assertThat(run("help", "run").out()).startsWith("Usage: stepwarden run");
  }

  @Test
  void aRunBuildsOnlyItsOwnSubcommandButHelpAndCompletionSeeThemAll() {
    assertThat(Main.commandLine("run").getSubcommands()).containsOnlyKeys("run");
    assertThat(Main.commandLine("--help").getSubcommands()).containsKeys("run", "check",
        "report", "queue", "completion", "help");
    assertThat(Main.commandLine("completion").getSubcommands()).hasSizeGreaterThan(5);
    assertThat(run("completion").out()).contains("report").contains("replay");
  }

  @Test
  void completionPrintsABashScript() {
    Out r = run("completion");
    assertThat(r.code()).isZero();
    assertThat(r.out()).contains("complete -F").contains("stepwarden");
  }

  @Test
  void completionPipedIntoBashFromAChildJvmArrivesWholeAndParses(@TempDir Path tmp)
      throws Exception {
    // the script is longer than the writer's buffer: before the flush at exit it was cut
    String java = ChildJvm.java();
    String cmd = "'" + java + "' -cp '" + System.getProperty("java.class.path")
        + "' dev.stepwarden.cli.Main completion";
    for (String shell : new String[] {"", " --shell zsh"}) {
      Process p = new ProcessBuilder("/bin/sh", "-c", cmd + shell + " | tee script | bash -n")
          .directory(tmp.toFile()).redirectErrorStream(true).start();
      String out = new String(p.getInputStream().readAllBytes());
      assertThat(p.waitFor()).as(out).isZero();
      String script = Files.readString(tmp.resolve("script"));
      assertThat(script.length()).isGreaterThan(16_384);
      assertThat(script).endsWith(run(("completion" + shell).split(" ")).out());
    }
  }

  @Test
  void serveAndRunTakeTheGuardFilesDurationSyntax() {
    assertThat(ServeCommand.parseDuration("1h")).isEqualTo(java.time.Duration.ofHours(1));
    assertThat(RunCommand.duration("1.5m", "--preempt-wait"))
        .isEqualTo(java.time.Duration.ofSeconds(90));
  }

  @Test
  void versionNamesTheProjectVersionAndTheControlProtocol() throws Exception {
    Out r = run("--version");
    assertThat(r.code()).isZero();
    String pom = Files.readString(Path.of("pom.xml"));
    String version = pom.replaceFirst("(?s).*?<parent>.*?<version>([^<]+)</version>.*", "$1");
    assertThat(r.out()).startsWith("stepwarden " + version + "\n")
        .contains("control protocol " + dev.stepwarden.control.ControlFile.PROTOCOL);
    assertThat(run("run", "--version").out()).isEqualTo(r.out());
  }

  @Test
  void runSetChangesTheGuardFileAndTheStartingRateReachesTheTrainer(@TempDir Path tmp)
      throws Exception {
    Path rules = tmp.resolve("night.yaml");
    Files.writeString(rules, "run:\n  command: [sh, -c, 'echo \"$0\" > seen.txt',"
        + " '{learning_rate}']\n"
        + "  learning_rate: 0.1\n  workdir: " + tmp + "\n");
    Out r = run("run", "--rules", rules.toString(), "--set", "run.learning_rate=0.05", "--set",
        "run.name=set-test", "-q", "--run-dir", tmp.resolve("runs/one").toString());
    assertThat(r.code()).as(r.err() + r.out()).isZero();
    assertThat(Files.readString(tmp.resolve("seen.txt")).strip()).isEqualTo("0.05");
    // the run directory keeps the changed file, so --resume would continue with it
    assertThat(Files.readString(tmp.resolve("runs/one/guards.yaml")))
        .contains("learning_rate: 0.05").contains("name: \"set-test\"");
    Out bad = run("run", "--rules", rules.toString(), "--set", "run.learning_rat=0.05");
    assertThat(bad.code()).isEqualTo(ExitCodes.CONFIG);
    assertThat(bad.err()).startsWith("after --set: ").contains("did you mean 'learning_rate'?");
  }

  @Test
  void aTrainerOptionBeforeAMissingDoubleDashGetsAHint() {
    Out r = run("run", "--rules", "r.yaml", "python3", "train.py", "--lr", "0.1");
    assertThat(r.code()).isEqualTo(ExitCodes.USAGE);
    assertThat(r.err()).contains("'--lr'").contains("hint: put '--' before the training command");
    assertThat(run("run", "--rules", "r.yaml", "--quite", "--", "python3").err())
        .doesNotContain("hint:");
  }

  @Test
  void restartSteeringWithoutTheRatePlaceholderIsRefusedByCheckWithTheFix(@TempDir Path tmp)
      throws Exception {
    Path f = tmp.resolve("literal.yaml");
    Files.writeString(f, "run:\n  command: [sh, -c, 'true', --lr, '3.0']\n  learning_rate: 1.5\n"
        + "steer: { by: restart }\n");
    Out r = run("check", f.toString());
    assertThat(r.code()).isEqualTo(ExitCodes.CONFIG);
    assertThat(r.err()).startsWith(f + ":2:").contains("has none")
        .contains("add it to the command (e.g. --lr \"{learning_rate}\")");
    // the same command given after '--' is refused by run before anything starts
    Files.writeString(f, "run:\n  learning_rate: 1.5\nsteer: { by: restart }\n");
    Out viaRun = run("run", "--rules", f.toString(), "--", "sh", "-c", "true", "--lr", "3.0");
    assertThat(viaRun.code()).isEqualTo(ExitCodes.CONFIG);
    assertThat(viaRun.err()).contains("{learning_rate}");
  }

  @Test
  void aMissingTrainerScriptEndsTheRunAtOnceNamingTheScriptAndTheNearestName(@TempDir Path tmp)
      throws Exception {
    Files.writeString(tmp.resolve("train.py"), "print('never run')\n");
    Path f = tmp.resolve("night.yaml");
    Files.writeString(f, "run:\n  command: [python3, -u, -X, dev, trian.py, --lr,"
        + " '{learning_rate}']\n  learning_rate: 0.1\n  workdir: " + tmp + "\n");
    long t0 = System.nanoTime();
    Out r = run("run", "--rules", f.toString(), "--run-dir", tmp.resolve("runs/x").toString());
    long seconds = (System.nanoTime() - t0) / 1_000_000_000L;
    assertThat(r.code()).isEqualTo(ExitCodes.CONFIG);
    assertThat(seconds).isLessThan(30);
    assertThat(r.err()).contains("the script 'trian.py' that python3 is to run does not exist in "
        + tmp.toRealPath()).contains("did you mean 'train.py'?");
    // check says so as a warning: the file may be checked away from where it is run
    Out c = run("check", f.toString());
    assertThat(c.code()).isZero();
    assertThat(c.err()).contains("warning: the script 'trian.py'");
  }

  /** The guard-file sketch of the product brief, as a test fixture. */
  static final class GuardFilesSketch {
    static final String TEXT = String.join("\n",
        "run:",
        "  name: sensor-net",
        "  command: [python3, train.py, --lr, \"{learning_rate}\"]",
        "  learning_rate: 0.1",
        "read: { from: stdout, format: json, series: { train: loss, validation: val_loss } }",
        "guards:",
        "  - name: flat-validation",
        "    when: { flattens: { series: validation, over: 5, gain_below: 0.5% } }",
        "    do: { scale: 0.5 }",
        "    then_wait: 3",
        "limits:",
        "  learning_rate: { min: 1.0e-6, max: 1.0 }",
        "");
  }
}
