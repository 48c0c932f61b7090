package dev.stepwarden.control;

import static org.assertj.core.api.Assertions.assertThat;

import java.io.InputStream;
import java.net.URL;
import java.net.URLClassLoader;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.concurrent.TimeUnit;
import javax.tools.JavaCompiler;
import javax.tools.ToolProvider;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;

/** The helpers we ship follow the control file as {@link ControlFile} writes it. */
class TrainerHelpersTest {
  @TempDir
  Path tmp;

  private Path resource(String name, Path to) throws Exception {
    try (InputStream in = ControlFile.class.getResourceAsStream(name)) {
      Files.write(to, in.readAllBytes());
    }
    return to;
  }

  @Test
  void javaHelperCompilesWithTheJdkAloneAndFollowsRevisionsAndCheckpointRequests()
      throws Exception {
    Path src = resource(ControlFile.JAVA_HELPER, tmp.resolve("StepwardenControl.java"));
    JavaCompiler javac = ToolProvider.getSystemJavaCompiler();
    assertThat(javac.run(null, null, null, "-Xlint:all", "-Werror", "-d", tmp.toString(),
        src.toString())).isZero();
    Path file = tmp.resolve("control.json");
    ControlFile control = new ControlFile(file, 0);
    try (URLClassLoader cl = new URLClassLoader(new URL[] {tmp.toUri().toURL()})) {
      Class<?> c = cl.loadClass("StepwardenControl");
      Object helper = c.getConstructor(Path.class, double.class).newInstance(file, 0.1);
      assertThat(c.getMethod("rate").invoke(helper)).isEqualTo(0.1); // no file yet
      control.publish(0.05, "flat", 40);
      assertThat(c.getMethod("rate").invoke(helper)).isEqualTo(0.05);
      assertThat(c.getMethod("appliedRevision").invoke(helper)).isEqualTo(1L);
      assertThat((String) c.getMethod("confirmationJson").invoke(helper))
          .isEqualTo(",\"lr\":0.05,\"applied_revision\":1");
      assertThat(c.getMethod("checkpointRequested").invoke(helper)).isEqualTo(false);
      control.requestCheckpoint(0.05, "(pre-emption)", 41);
      assertThat(c.getMethod("checkpointRequested").invoke(helper)).isEqualTo(true);
      assertThat(c.getMethod("checkpointRequested").invoke(helper)).isEqualTo(false);
    }
  }

  @Test
  void pythonHelperFollowsRevisionsIgnoresGarbageAndReportsTheAppliedRevision()
      throws Exception {
    resource(ControlFile.PYTHON_HELPER, tmp.resolve("stepwarden_control.py"));
    Path file = tmp.resolve("control.json");
    ControlFile control = new ControlFile(file, 0);
    control.publish(0.025, "flat", 10);
    Path script = tmp.resolve("check.py");
    Files.writeString(script, String.join("\n",
        "import json, os, sys",
        "sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))",
        "from stepwarden_control import Control",
        "c = Control(default_lr=0.1, path=sys.argv[1])",
        "print(c.rate(), json.dumps(c.confirmation(), sort_keys=True))",
        "open(sys.argv[1], 'w').write('{\"revision\": 9')  # torn: ignored",
        "print(c.rate())",
        "print(Control(default_lr=0.3, path=None).rate())", ""));
    String out = python(script.toString(), file.toString());
    assertThat(out).startsWith("0.025 {\"applied_revision\": 1, \"lr\": 0.025}\n")
        .contains("stepwarden_control: ignoring").endsWith("0.025\n0.3\n");
  }

  @Test
  void bothHelpersFollowTheProtocolTheSupervisorWrites() throws Exception {
    String py = read(ControlFile.PYTHON_HELPER);
    String java = read(ControlFile.JAVA_HELPER);
    assertThat(py).contains("\nPROTOCOL = " + ControlFile.PROTOCOL + "\n");
    assertThat(java).contains("public static final int PROTOCOL = " + ControlFile.PROTOCOL + ";");
    Path file = tmp.resolve("control.json");
    new ControlFile(file, 0).publish(0.05, "flat", 3);
    assertThat(Files.readString(file)).contains("\"protocol\":" + ControlFile.PROTOCOL);
  }

  @Test
  void anOldPythonHelperCopyWarnsOnceOnANewerProtocolAndTheOldCallIsRefusedWithItsNewName()
      throws Exception {
    resource(ControlFile.PYTHON_HELPER, tmp.resolve("stepwarden_control.py"));
    Path file = tmp.resolve("control.json");
    int newer = ControlFile.PROTOCOL + 1;
    Files.writeString(file, "{\"revision\": 1, \"protocol\": " + newer
        + ", \"learning_rate\": 0.02}");
    Path script = tmp.resolve("old.py");
    Files.writeString(script, String.join("\n",
        "import os, sys",
        "sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))",
        "from stepwarden_control import Control",
        "c = Control(default_lr=0.1, path=sys.argv[1])",
        "print(c.rate())",
        "os.utime(sys.argv[1], ns=(1, 1))  # a change: looked at again, not warned again",
        "print(c.rate())",
        "try:",
        "    c.report()",
        "except AttributeError as e:",
        "    print('refused:', e)", ""));
    String out = python(script.toString(), file.toString());
    assertThat(out).contains("0.02\n0.02\n")
        .contains("refused: Control.report() is now Control.confirmation()");
    assertThat(out.split("follows protocol " + ControlFile.PROTOCOL, -1)).hasSize(2);
    assertThat(python(tmp.resolve("stepwarden_control.py").toString())).isEqualTo("stepwarden_control control protocol " + ControlFile.PROTOCOL + "\n");
  }

  /** Runs python3 with {@code args}; its stdout and stderr together. */
  private static String python(String... args) throws Exception {
    java.util.List<String> cmd = new java.util.ArrayList<>(java.util.List.of("python3"));
    cmd.addAll(java.util.List.of(args));
    Process p = new ProcessBuilder(cmd).redirectErrorStream(true).start();
    String out = new String(p.getInputStream().readAllBytes(), StandardCharsets.UTF_8);
    assertThat(p.waitFor(30, TimeUnit.SECONDS)).isTrue();
    return out;
  }

  private static String read(String resource) throws Exception {
    try (InputStream in = ControlFile.class.getResourceAsStream(resource)) {
      return new String(in.readAllBytes(), StandardCharsets.UTF_8);
    }
  }
}
