package dev.stepwarden.process;

import static org.assertj.core.api.Assertions.assertThat;
import static org.assertj.core.api.Assertions.assertThatThrownBy;

import java.io.ByteArrayOutputStream;
import java.io.IOException;
import java.io.PrintStream;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.nio.file.attribute.PosixFilePermissions;
import java.time.Duration;
import java.util.ArrayList;
import java.util.HexFormat;
import java.util.List;
import java.util.Map;
import java.util.concurrent.atomic.AtomicLong;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;

/** What reaches the listener, the logs and the echo, with real trainers writing real bytes. */
class TrainerProcessOutputTest {
  private static final Duration WAIT = Duration.ofSeconds(30);

  @TempDir Path dir;

  private LaunchSpec.Builder spec(String... argv) {
    return LaunchSpec.builder().command(argv).workingDirectory(dir).echo(false);
  }

  /** A scenario of our own: every awkward shape of line a trainer may print, in one payload. */
  private static byte[] awkwardPayload() {
    ByteArrayOutputStream b = new ByteArrayOutputStream();
    b.writeBytes("plain\n".getBytes(StandardCharsets.US_ASCII));
    b.writeBytes("crlf\r\n".getBytes(StandardCharsets.US_ASCII));
    b.writeBytes("epoch 1:  10%\repoch 1:  50%\repoch 1: 100%\n".getBytes(StandardCharsets.US_ASCII));
    b.writeBytes("loss=0.5 caf\u00e9\n".getBytes(StandardCharsets.UTF_8));
    b.writeBytes(new byte[] {'b', 'a', 'd', (byte) 0xFF, (byte) 0xFE, 'x', '\n'});
    b.writeBytes(("X".repeat(40) + "\n").getBytes(StandardCharsets.US_ASCII));
    b.writeBytes("\n".getBytes(StandardCharsets.US_ASCII));
    b.writeBytes("tail without newline".getBytes(StandardCharsets.US_ASCII));
    return b.toByteArray();
  }

  /**
   * Expected lines of {@link #awkwardPayload()} with maxLineChars 24. The cap applies to what
   * follows the last redraw, so the 41-byte progress line is not cut. Malformed bytes 0xFF and 0xFE
   * each become one U+FFFD: Unicode Standard 15.0, s3.9, "U+FFFD Substitution of Maximal Subparts"
   * (section recalled from memory); the JDK's UTF-8 decoder follows that practice.
   */
  private static final List<String> AWKWARD_LINES = List.of(
      "plain", "crlf", "epoch 1: 100%", "loss=0.5 caf\u00e9", "bad\uFFFD\uFFFDx",
      "X".repeat(24), "", "tail without newline");

  @Test
  void linesAreSplitCleanedAndCutWhileBothLogsKeepEveryByte() throws Exception {
    byte[] payload = awkwardPayload();
    Path input = Files.write(dir.resolve("payload.bin"), payload);
    Path outLog = dir.resolve("trainer.out");
    Path errLog = dir.resolve("trainer.err");
    Procs.Lines lines = new Procs.Lines();
    TrainerProcess tp = TrainerProcess.start(
        spec("/bin/sh", "-c", "cat \"$1\"; cat \"$1\" >&2", "sh", input.toString())
            .maxLineChars(24).stdoutLog(outLog).stderrLog(errLog).build(), lines);

    assertThat(tp.waitFor()).isZero();

    assertThat(lines.out()).containsExactlyElementsOf(AWKWARD_LINES);
    assertThat(lines.err()).containsExactlyElementsOf(AWKWARD_LINES);
    assertThat(tp.linesRead()).isEqualTo(2L * AWKWARD_LINES.size());
    assertThat(tp.linesRead(TrainerStream.STDOUT)).isEqualTo(AWKWARD_LINES.size());
    assertThat(tp.oversizedLines()).as("the X line, once per stream").isEqualTo(2);
    assertThat(Files.readAllBytes(outLog)).isEqualTo(payload);
    assertThat(Files.readAllBytes(errLog)).isEqualTo(payload);
    assertThat(PosixFilePermissions.toString(Files.getPosixFilePermissions(outLog)))
        .isEqualTo("rw-------");
    assertThat(tp.firstPumpFailure()).isEmpty();
  }

  @Test
  void logsAreAppendedAcrossRestarts() throws Exception {
    Path outLog = dir.resolve("trainer.out");
    for (String word : List.of("first", "second")) {
      TrainerProcess tp = TrainerProcess.start(
          spec("/bin/echo", word).stdoutLog(outLog).build(), new Procs.Lines());
      assertThat(tp.waitFor()).isZero();
    }
    assertThat(Files.readString(outLog)).isEqualTo("first\nsecond\n");
  }

  @Test
  void aHugeLineIsCutAndCountedButLoggedWhole() throws Exception {
    Path outLog = dir.resolve("trainer.out");
    String py = "import sys\n"
        + "w = sys.stdout.buffer.write\n"
        + "for _ in range(80): w(b'y' * 65536)\n" // 5 MiB without a newline
        + "w(b'\\nafter\\n')\n";
    Procs.Lines lines = new Procs.Lines();
    TrainerProcess tp = TrainerProcess.start(
        spec("python3", "-c", py).maxLineChars(1024).stdoutLog(outLog).build(), lines);

    assertThat(tp.waitFor()).isZero();

    assertThat(lines.out()).containsExactly("y".repeat(1024), "after");
    assertThat(tp.oversizedLines()).isEqualTo(1);
    assertThat(Files.size(outLog)).isEqualTo(80L * 65536 + "\nafter\n".length());
  }

  @Test
  void aTrainerFloodingStderrNeverBlocksWhileOnlyStdoutIsOfInterest() throws Exception {
    // 16 MiB on stderr is 256 times the default 64 KiB pipe: undrained, the trainer would hang.
    String py = "import sys\n"
        + "for _ in range(256): sys.stderr.buffer.write(b'e' * 65535 + b'\\n')\n"
        + "print('done', flush=True)\n";
    List<String> stdout = new ArrayList<>();
    TrainerProcess tp = TrainerProcess.start(spec("python3", "-c", py).build(), (s, line) -> {
      if (s == TrainerStream.STDOUT) {
        synchronized (stdout) {
          stdout.add(line);
        }
      }
    });

    assertThat(tp.waitFor(WAIT)).as("finished, not stuck on a full stderr pipe").hasValue(0);

    assertThat(stdout).containsExactly("done");
    assertThat(tp.linesRead(TrainerStream.STDERR)).isEqualTo(256);
  }

  @Test
  void waitForReturnsOnlyAfterEveryLineWasDelivered() throws Exception {
    AtomicLong seen = new AtomicLong();
    TrainerProcess tp = TrainerProcess.start(spec("python3", "-c",
        "import sys\nfor i in range(20000): print('step=%d loss=1.0' % i)\nsys.exit(3)").build(),
        (s, line) -> seen.incrementAndGet());

    assertThat(tp.waitFor()).isEqualTo(3);

    assertThat(seen.get()).isEqualTo(20000);
    assertThat(tp.linesRead()).isEqualTo(20000);
  }

  @Test
  void aThrowingListenerIsRecordedAndTheTrainerStillDrains() throws Exception {
    PrintStream savedErr = System.err;
    System.setErr(new PrintStream(new ByteArrayOutputStream(), true, StandardCharsets.UTF_8));
    try {
      TrainerProcess tp = TrainerProcess.start(spec("python3", "-c",
          "for i in range(30000): print('line', i)").build(), (s, line) -> {
            throw new IllegalStateException("listener bug");
          });
      assertThat(tp.waitFor(WAIT)).hasValue(0);
      assertThat(tp.linesRead()).as("330 kB: five pipes' worth").isEqualTo(30000);
      assertThat(tp.firstPumpFailure()).get().extracting(Throwable::getCause)
          .extracting(Throwable::getMessage).isEqualTo("listener bug");
    } finally {
      System.setErr(savedErr);
    }
  }

  @Test
  void environmentAndWorkingDirectoryArrive() throws Exception {
    Path work = Files.createDirectory(dir.resolve("run dir"));
    Procs.Lines lines = new Procs.Lines();
    TrainerProcess tp = TrainerProcess.start(LaunchSpec.builder()
        .command("python3", "-c", "import os\nprint(os.getcwd())\n"
            + "print(os.environ['STEPWARDEN_PROBE'])\nprint(os.environ.get('HOME', '<unset>'))")
        .workingDirectory(work)
        .environment(Map.of("STEPWARDEN_PROBE", "lr=0.1 and spaces"))
        .echo(false).build(), lines);

    assertThat(tp.waitFor()).isZero();

    assertThat(lines.out()).containsExactly(work.toRealPath().toString(), "lr=0.1 and spaces",
        System.getenv().getOrDefault("HOME", "<unset>"));
  }

  @Test
  void argvArrivesVerbatimSoNoShellIsInvolved() throws Exception {
    List<String> args = List.of("two words", "$HOME", "`id`", "$(id)", "*", "a;b|c&d>e", "'q'",
        "\"dq\"", "", "back\\slash", "new\nline", "caf\u00e9", "--", "-c");
    List<String> argv = new ArrayList<>(List.of("python3", "-c",
        "import sys\nfor a in sys.argv[1:]: print(a.encode('utf-8', 'surrogateescape').hex())"));
    argv.addAll(args);
    Procs.Lines lines = new Procs.Lines();
    TrainerProcess tp = TrainerProcess.start(
        LaunchSpec.builder().command(argv).workingDirectory(dir).echo(false).build(), lines);

    assertThat(tp.waitFor()).isZero();

    List<String> expected = args.stream()
        .map(a -> HexFormat.of().formatHex(a.getBytes(StandardCharsets.UTF_8))).toList();
    assertThat(lines.out()).containsExactlyElementsOf(expected);
  }

  @Test
  void echoCopiesLinesToTheSupervisorsOwnStreamsOnlyWhenOn() throws Exception {
    PrintStream savedOut = System.out;
    PrintStream savedErr = System.err;
    ByteArrayOutputStream out = new ByteArrayOutputStream();
    ByteArrayOutputStream err = new ByteArrayOutputStream();
    System.setOut(new PrintStream(out, true, StandardCharsets.UTF_8));
    System.setErr(new PrintStream(err, true, StandardCharsets.UTF_8));
    try {
      String script = "printf 'one\\r\\n50%%\\r100%%\\n'; printf 'warn\\n' >&2";
      TrainerProcess on = TrainerProcess.start(spec("/bin/sh", "-c", script).echo(true).build(),
          new Procs.Lines());
      assertThat(on.waitFor()).isZero();
      TrainerProcess off = TrainerProcess.start(spec("/bin/sh", "-c", script).build(),
          new Procs.Lines());
      assertThat(off.waitFor()).isZero();
    } finally {
      System.setOut(savedOut);
      System.setErr(savedErr);
    }
    assertThat(out.toString(StandardCharsets.UTF_8)).isEqualTo("one\n100%\n");
    assertThat(err.toString(StandardCharsets.UTF_8)).isEqualTo("warn\n");
  }

  @Test
  void aMissingProgramFailsAtStartWithAMessageNamingIt() {
    assertThatThrownBy(() -> TrainerProcess.start(spec("no-such-trainer-7f3a").build(),
        new Procs.Lines()))
        .isInstanceOf(IOException.class)
        .hasMessageContaining("no-such-trainer-7f3a").hasMessageContaining("PATH");
  }

  @Test
  void aProgramFileWithoutExecutePermissionFailsAtStart() throws Exception {
    Path script = Files.writeString(dir.resolve("train.sh"), "#!/bin/sh\necho hi\n");
    assertThatThrownBy(() -> TrainerProcess.start(spec("./train.sh").build(), new Procs.Lines()))
        .isInstanceOf(IOException.class)
        .hasMessageContaining(script.toString()).hasMessageContaining("chmod +x");
  }

  @Test
  void aProgramIsFoundOnThePathGivenInTheTrainersEnvironment() throws Exception {
    Path bin = Files.createDirectory(dir.resolve("bin"));
    Path script = Files.writeString(bin.resolve("my-trainer"), "#!/bin/sh\necho from-my-path\n");
    Files.setPosixFilePermissions(script, PosixFilePermissions.fromString("rwx------"));
    Procs.Lines lines = new Procs.Lines();
    TrainerProcess tp = TrainerProcess.start(spec("my-trainer")
        .environment(Map.of("PATH", bin + ":/usr/bin:/bin")).build(), lines);
    assertThat(tp.waitFor()).isZero();
    assertThat(lines.out()).containsExactly("from-my-path");
  }
}
