package dev.stepwarden.cli;

import dev.stepwarden.rules.ConfigException;
import dev.stepwarden.rules.GuardFile;
import dev.stepwarden.rules.GuardFiles;
import dev.stepwarden.supervise.RunOutcome;
import java.io.IOException;
import java.io.InputStream;
import java.io.PrintWriter;
import java.net.URISyntaxException;
import java.nio.file.Files;
import java.nio.file.Path;
import java.time.Instant;
import java.time.ZoneOffset;
import java.time.format.DateTimeFormatter;
import java.util.ArrayList;
import java.util.List;
import java.util.concurrent.Callable;
import picocli.CommandLine.Command;
import picocli.CommandLine.Model.CommandSpec;
import picocli.CommandLine.Option;
import picocli.CommandLine.Spec;

@Command(name = "demo", description = "A whole supervised night in well under a minute: the"
    + " bundled demo trainer (a small neural network trained with mini-batch SGD on invented"
    + " greenhouse data) starts with a learning rate that is far too large, and the guards have"
    + " to rescue it. Exit 0 when the night ended as designed.")
final class DemoCommand implements Callable<Integer> {
  static final String RULES = "/dev/stepwarden/demo/demo-night.yaml";

  @Spec
  CommandSpec spec;

  @Option(names = "--run-dir", paramLabel = "DIR", description = "Where to keep the demo run"
      + " (default: runs/demo-TIMESTAMP).")
  Path runDir;

  @Option(names = {"-q", "--quiet"}, description = "Do not echo the trainer's output.")
  boolean quiet = true;

  @Override
  public Integer call() throws IOException {
    PrintWriter out = spec.commandLine().getOut();
    PrintWriter err = spec.commandLine().getErr();
    Path dir = runDir != null ? runDir : Path.of("runs", "demo-" + DateTimeFormatter
        .ofPattern("yyyyMMdd-HHmmss").withZone(ZoneOffset.UTC).format(Instant.now()));
    GuardFile g;
    try {
      g = demoRules(dir);
    } catch (ConfigException e) {
      err.println("stepwarden: the bundled demo guard file is invalid: " + e.getMessage());
      return ExitCodes.INTERNAL;
    }
    out.println("stepwarden demo: starting the demo trainer at learning rate "
        + g.run().learningRate() + " (far too large on purpose)");
    out.flush();
    RunCommand.Ran ran = RunCommand.supervise(g, dir, quiet, out, err);
    if (ran.result() == null) {
      return ran.exitCode();
    }
    boolean asDesigned = ran.result().interventions() > 0
        && (ran.result().outcome() == RunOutcome.FINISHED
            || ran.result().outcome() == RunOutcome.STOPPED_EARLY);
    out.println(asDesigned ? "The night ended as designed: the guards lowered the rate and the"
        + " run converged." : "The night did NOT end as designed; read the audit log.");
    return asDesigned ? ExitCodes.OK : ran.result().outcome().exitCode();
  }

  /** The bundled guard file, with the command pointing at this very jar's demo trainer. */
  static GuardFile demoRules(Path runDir) throws IOException, ConfigException {
    byte[] yaml;
    try (InputStream in = DemoCommand.class.getResourceAsStream(RULES)) {
      if (in == null) {
        throw new IOException("the demo guard file " + RULES + " is missing from the jar");
      }
      yaml = in.readAllBytes();
    }
    // Keep the bundled guard file in the run directory, as every run does (replay needs it).
    Path copy = runDir.toAbsolutePath().resolve("guards.yaml");
    Files.createDirectories(copy.getParent());
    if (!Files.exists(copy)) {
      Files.write(copy, yaml);
    }
    GuardFile g = GuardFiles.parse(yaml, copy);
    Path work = runDir.toAbsolutePath().resolve("trainer");
    Files.createDirectories(work);
    List<String> cmd = new ArrayList<>();
    cmd.add(Path.of(System.getProperty("java.home"), "bin", "java").toString());
    cmd.add("-XX:+UseSerialGC");
    cmd.add("-Xmx128m"); // a small network on a small data set: keep the demo's footprint small
    cmd.add("-cp");
    cmd.add(ownClasspath());
    cmd.addAll(List.of("dev.stepwarden.demo.DemoTrainer", "--lr", "{learning_rate}",
        "--resume", "{resume_from}", "--skip-batches", "{skip_batches}", "--epochs", "30",
        "--step-delay-ms", "2", "--checkpoint-dir", "ckpt"));
    return g.withRun(new GuardFile.Run(g.run().name(), cmd, g.run().learningRate(), work,
        g.run().env(), g.run().stopGrace()));
  }

  static String ownClasspath() {
    try {
      return Path.of(DemoCommand.class.getProtectionDomain().getCodeSource().getLocation()
          .toURI()).toString();
    } catch (URISyntaxException e) {
      return System.getProperty("java.class.path");
    }
  }
}
