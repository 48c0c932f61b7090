package dev.stepwarden.cli;

import static org.assertj.core.api.Assertions.assertThat;

import java.io.File;
import java.io.OutputStream;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.nio.file.attribute.PosixFilePermissions;
import java.util.Arrays;
import java.util.concurrent.TimeUnit;
import java.util.jar.Attributes;
import java.util.jar.JarOutputStream;
import java.util.jar.Manifest;
import java.util.stream.Collectors;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;

/**
 * The launcher script the build puts next to the jar ({@code src/build/stepwarden}) runs from a
 * plain non-interactive shell with an empty environment, as cron and batch jobs start it, and
 * through a link on PATH. The jar here is a stand-in whose manifest points at the test classpath
 * (the real one is built after the tests).
 */
class LauncherTest {
  @TempDir
  Path tmp;

  @Test
  void theLauncherRunsVersionFromANonInteractiveShellThroughALinkOnPath() throws Exception {
    Path lib = Files.createDirectories(tmp.resolve("opt/stepwarden"));
    Path script = lib.resolve("stepwarden");
    Files.copy(Path.of("src/build/stepwarden"), script);
    Files.setPosixFilePermissions(script, PosixFilePermissions.fromString("rwxr-xr-x"));
    Manifest m = new Manifest();
    m.getMainAttributes().put(Attributes.Name.MANIFEST_VERSION, "1.0");
    m.getMainAttributes().put(Attributes.Name.MAIN_CLASS, Main.class.getName());
    m.getMainAttributes().put(Attributes.Name.CLASS_PATH, Arrays.stream(
        System.getProperty("java.class.path").split(File.pathSeparator))
        .map(p -> Path.of(p).toUri().toString()).collect(Collectors.joining(" ")));
    try (OutputStream out = Files.newOutputStream(lib.resolve("stepwarden.jar"));
        JarOutputStream jar = new JarOutputStream(out, m)) {
      jar.flush();
    }
    Path bin = Files.createDirectories(tmp.resolve("bin"));
    Files.createSymbolicLink(bin.resolve("stepwarden"), Path.of("../opt/stepwarden/stepwarden"));
    // env -i: no HOME, no aliases, no profile, as under cron; JAVA_HOME names this JVM
    Process p = new ProcessBuilder("env", "-i", "PATH=" + bin + ":/usr/bin:/bin",
        "JAVA_HOME=" + System.getProperty("java.home"), "/bin/sh", "-c",
        "cd / && stepwarden --version").redirectErrorStream(true).start();
    String out = new String(p.getInputStream().readAllBytes(), StandardCharsets.UTF_8);
    assertThat(p.waitFor(60, TimeUnit.SECONDS)).isTrue();
    assertThat(p.exitValue()).as(out).isZero();
    assertThat(out).startsWith("stepwarden " + Main.Version.projectVersion() + "\n")
        .contains("control protocol");
  }

  @Test
  void withoutItsJarTheLauncherSaysHowToBuildIt() throws Exception {
    Path script = tmp.resolve("stepwarden");
    Files.copy(Path.of("src/build/stepwarden"), script);
    Files.setPosixFilePermissions(script, PosixFilePermissions.fromString("rwxr-xr-x"));
    Process p = new ProcessBuilder("env", "-i", "PATH=/usr/bin:/bin", script.toString(),
        "--version").redirectErrorStream(true).start();
    String out = new String(p.getInputStream().readAllBytes(), StandardCharsets.UTF_8);
    assertThat(p.waitFor(60, TimeUnit.SECONDS)).isTrue();
    assertThat(p.exitValue()).isEqualTo(1);
    assertThat(out).contains("stepwarden.jar is missing").contains("mvn -B -q package");
  }
}
