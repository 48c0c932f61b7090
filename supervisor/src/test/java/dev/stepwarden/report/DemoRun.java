package dev.stepwarden.report;

import dev.stepwarden.rules.GuardFile;
import dev.stepwarden.rules.GuardFiles;
import dev.stepwarden.supervise.RunOptions;
import dev.stepwarden.supervise.Supervisor;
import java.io.InputStream;
import java.io.OutputStream;
import java.io.PrintStream;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.ArrayList;
import java.util.List;

/**
 * One real supervised night on the bundled demo trainer (our own invented scenario), made once
 * per test JVM and shared by the report and replay tests: the trainer runs as a child JVM with
 * the test classpath, under the real {@link Supervisor}, with the bundled demo guard file.
 */
public final class DemoRun {
  private static Path dir;
  private static Supervisor.Result result;

  private DemoRun() {}

  /** The run directory (created on first use under target/). */
  public static synchronized Path dir() throws Exception {
    if (dir == null) {
      Path root = Path.of("target", "test-demo-runs").toAbsolutePath();
      Files.createDirectories(root);
      Path d = Files.createTempDirectory(root, "demo-");
      Path rules = d.resolveSibling(d.getFileName() + "-guards.yaml");
      try (InputStream in = DemoRun.class.getResourceAsStream(
          "/dev/stepwarden/demo/demo-night.yaml")) {
        Files.write(rules, in.readAllBytes());
      }
      GuardFile g = GuardFiles.load(rules);
      Path work = d.resolve("trainer");
      Files.createDirectories(work);
      List<String> cmd = new ArrayList<>(List.of(
          Path.of(System.getProperty("java.home"), "bin", "java").toString(),
          "-XX:+UseSerialGC", "-XX:TieredStopAtLevel=1", "-cp",
          System.getProperty("java.class.path"), "dev.stepwarden.demo.DemoTrainer", "--lr",
          "{learning_rate}", "--resume", "{resume_from}", "--skip-batches", "{skip_batches}",
          "--epochs", "30", "--step-delay-ms", "2", "--checkpoint-dir", "ckpt"));
      g = g.withRun(new GuardFile.Run(g.run().name(), cmd, g.run().learningRate(), work,
          g.run().env(), g.run().stopGrace()));
      PrintStream quiet = new PrintStream(OutputStream.nullOutputStream());
      result = new Supervisor(g, new RunOptions(d, true, null, quiet)).run();
      dir = d;
    }
    return dir;
  }

  /** What the live supervisor said at the end. */
  public static synchronized Supervisor.Result result() throws Exception {
    dir();
    return result;
  }

  /** The guard file the night ran with (the run directory's copy). */
  public static Path rules() throws Exception {
    return dir().resolve("guards.yaml");
  }
}
