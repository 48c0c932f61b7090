package dev.stepwarden.queue;

import dev.stepwarden.cli.Main;
import java.io.IOException;
import java.io.PrintWriter;
import java.io.StringWriter;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.ArrayList;
import java.util.List;
import java.util.function.BooleanSupplier;

/** A stand-in trainer of our own and helpers shared by the queue tests. */
final class Fixtures {
  private Fixtures() {}

  /**
   * A guard file whose trainer logs "start JOB GPUS" and "end JOB" to {@code events}, prints
   * {@code steps} metric lines {@code delay} seconds apart (loss 1/step) and exits 0.
   */
  static Path guardFile(Path dir, Path events, int steps, String delay) throws IOException {
    Path script = dir.resolve("trainer.sh");
    Files.writeString(script, String.join("\n",
        "echo \"start $STEPWARDEN_QUEUE_JOB ${CUDA_VISIBLE_DEVICES:-none} $$\" >> \"$1\"",
        "i=1",
        "while [ $i -le $2 ]; do",
        "  echo \"{\\\"step\\\": $i, \\\"loss\\\": $(awk \"BEGIN{print 1/$i}\")}\"",
        "  sleep $3",
        "  i=$((i+1))",
        "done",
        "echo \"end $STEPWARDEN_QUEUE_JOB\" >> \"$1\"", ""));
    Path rules = dir.resolve("night.yaml");
    Files.writeString(rules, "run:\n  name: night\n  learning_rate: 0.1\n  stop_grace: 2s\n"
        + "  command: [sh, " + script + ", " + events + ", '" + steps + "', '" + delay + "']\n"
        + "limits:\n  silence: 0\n");
    return rules;
  }

  static List<String[]> events(Path events) throws IOException {
    List<String[]> out = new ArrayList<>();
    if (Files.exists(events)) {
      for (String l : Files.readAllLines(events)) {
        if (!l.isBlank()) {
          out.add(l.split(" "));
        }
      }
    }
    return out;
  }

  static String cli(String... args) {
    StringWriter out = new StringWriter();
    StringWriter err = new StringWriter();
    int code = Main.execute(args, new PrintWriter(out, true), new PrintWriter(err, true));
    if (code != 0) {
      throw new AssertionError("stepwarden " + String.join(" ", args) + " exited " + code + ": "
          + err);
    }
    return out.toString();
  }

  /** Runs {@code stepwarden ARGS} in this JVM, expecting exit {@code code}; returns stderr. */
  static String failing(int code, String... args) {
    StringWriter out = new StringWriter();
    StringWriter err = new StringWriter();
    int got = Main.execute(args, new PrintWriter(out, true), new PrintWriter(err, true));
    if (got != code) {
      throw new AssertionError("stepwarden " + String.join(" ", args) + " exited " + got
          + " (expected " + code + "): " + out + err);
    }
    return err.toString();
  }

  static boolean await(BooleanSupplier condition, long millis) throws InterruptedException {
    long end = System.nanoTime() + millis * 1_000_000;
    while (!condition.getAsBoolean()) {
      if (System.nanoTime() > end) {
        return false;
      }
      Thread.sleep(100);
    }
    return true;
  }

  static String read(Path p) {
    try {
      return Files.exists(p) ? Files.readString(p, StandardCharsets.UTF_8) : "";
    } catch (IOException e) {
      return "";
    }
  }

  /** Starts {@code stepwarden ARGS} in a child JVM with the test classpath. */
  static Process stepwarden(Path log, String... args) throws IOException {
    List<String> cmd = new ArrayList<>(List.of(
        Path.of(System.getProperty("java.home"), "bin", "java").toString(),
        "-XX:+UseSerialGC", "-Xshare:auto", "-cp", System.getProperty("java.class.path"),
        "dev.stepwarden.cli.Main"));
    cmd.addAll(List.of(args));
    return new ProcessBuilder(cmd).redirectErrorStream(true)
        .redirectOutput(ProcessBuilder.Redirect.appendTo(log.toFile())).start();
  }
}
