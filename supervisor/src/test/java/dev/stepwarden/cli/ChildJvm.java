package dev.stepwarden.cli;

import java.nio.file.Path;
import java.util.ArrayList;
import java.util.List;

/** Starts {@code stepwarden} (or another main class) in a child JVM with the test classpath. */
final class ChildJvm {
  private ChildJvm() {}

  static ProcessBuilder stepwarden(Path workdir, Path output, String... args) {
    return main(workdir, output, "dev.stepwarden.cli.Main", args);
  }

  static ProcessBuilder main(Path workdir, Path output, String mainClass, String... args) {
    List<String> cmd = new ArrayList<>();
    cmd.add(Path.of(System.getProperty("java.home"), "bin", "java").toString());
    cmd.add("-XX:+UseSerialGC");
    cmd.add("-cp");
    cmd.add(System.getProperty("java.class.path"));
    cmd.add(mainClass);
    cmd.addAll(List.of(args));
    ProcessBuilder pb = new ProcessBuilder(cmd).directory(workdir.toFile());
    pb.redirectErrorStream(true);
    pb.redirectOutput(output.toFile());
    return pb;
  }

  static String java() {
    return Path.of(System.getProperty("java.home"), "bin", "java").toString();
  }

  static boolean alive(long pid) {
    return ProcessHandle.of(pid).map(ProcessHandle::isAlive).orElse(false);
  }

  static void waitGone(long pid, long millis) throws InterruptedException {
    long end = System.nanoTime() + millis * 1_000_000;
    while (alive(pid) && System.nanoTime() < end) {
      Thread.sleep(50);
    }
  }
}
