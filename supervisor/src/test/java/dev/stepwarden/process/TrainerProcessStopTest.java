package dev.stepwarden.process;

import static org.assertj.core.api.Assertions.assertThat;
import static org.junit.jupiter.api.Assumptions.assumeTrue;

import java.io.BufferedReader;
import java.io.IOException;
import java.io.InputStreamReader;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.time.Duration;
import java.util.ArrayList;
import java.util.List;
import java.util.OptionalInt;
import java.util.concurrent.TimeUnit;
import java.util.concurrent.atomic.AtomicReference;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;

/**
 * Launch and stop with real child processes: process groups, grace then KILL, the parent-death
 * signal and its thread caveat, and a supervisor JVM that is SIGKILLed.
 *
 * <p>Exit codes of signalled trainers follow the JDK convention 128 + signal number, with
 * SIGTERM = 15 and SIGKILL = 9 (Linux signal(7), x86/ARM numbering).
 */
class TrainerProcessStopTest {
  private static final Duration WAIT = Duration.ofSeconds(10);

  /**
   * How long a starter thread lives on after the fork before it ends. setpriv arms the signal
   * (prctl) a millisecond or so after the fork; should the forking thread end before that, the
   * child is already reparented to a sibling thread and the binding lands there. Lingering makes
   * both thread tests below face the real hazard: a thread that forks, works a while, and ends.
   */
  private static final long LINGER_MILLIS = 300;

  @TempDir Path dir;

  private LaunchSpec.Builder spec(String... argv) {
    return LaunchSpec.builder().command(argv).workingDirectory(dir).echo(false)
        .stopGrace(Duration.ofSeconds(5));
  }

  @Test
  void stopsWholeTreeIncludingForkedGrandchild() throws Exception {
    Procs.Lines lines = new Procs.Lines();
    long grandchild = -1;
    try (TrainerProcess tp = TrainerProcess.start(
        spec("/bin/sh", "-c", "sleep 300 & echo \"grandchild=$!\"; wait").build(), lines)) {
      grandchild = lines.awaitPid("grandchild", WAIT);
      assertThat(Procs.running(grandchild)).as("grandchild runs before the stop").isTrue();
      assertThat(Procs.stat(grandchild)[2]).as("grandchild shares the trainer's group")
          .isEqualTo(Long.toString(tp.pid()));

      StopResult r = tp.stop();

      assertThat(r.wasAlive()).isTrue();
      assertThat(r.killed()).as("TERM was enough").isFalse();
      assertThat(r.exitCode()).hasValue(128 + 15);
      assertThat(Procs.exists(tp.pid())).as("trainer reaped by us: no zombie").isFalse();
      assertThat(Procs.running(grandchild)).as("grandchild ended with the group").isFalse();
      assertThat(Procs.awaitVanished(grandchild, WAIT)).as("grandchild reaped by PID 1").isTrue();
      assertThat(ProcessHandle.of(tp.pid())).isEmpty();
    } finally {
      Procs.killQuietly(grandchild);
    }
  }

  @Test
  void trainerIgnoringTermIsKilledAfterTheGrace() throws Exception {
    Procs.Lines lines = new Procs.Lines();
    String py = "import signal, time\n"
        + "signal.signal(signal.SIGTERM, signal.SIG_IGN)\n"
        + "print('ready', flush=True)\n"
        + "time.sleep(120)\n";
    Duration grace = Duration.ofMillis(300);
    try (TrainerProcess tp = TrainerProcess.start(
        spec("python3", "-c", py).stopGrace(grace).build(), lines)) {
      lines.await("ready", WAIT);

      StopResult r = tp.stop();

      assertThat(r.wasAlive()).isTrue();
      assertThat(r.killed()).isTrue();
      assertThat(r.exitCode()).hasValue(128 + 9);
      assertThat(r.took()).as("the grace was granted before KILL").isGreaterThanOrEqualTo(grace);
      assertThat(tp.isAlive()).isFalse();
    }
  }

  @Test
  void stopEndsGroupMembersLeftBehindByATrainerThatAlreadyExited() throws Exception {
    Procs.Lines lines = new Procs.Lines();
    long leftover = -1;
    try (TrainerProcess tp = TrainerProcess.start(
        spec("/bin/sh", "-c", "sleep 300 >/dev/null 2>&1 & echo \"left=$!\"; exit 0").build(),
        lines)) {
      assertThat(tp.waitFor()).isZero();
      leftover = lines.awaitPid("left", WAIT);
      assertThat(Procs.running(leftover)).as("the leftover outlives the trainer").isTrue();

      StopResult r = tp.stop();

      assertThat(r.wasAlive()).as("a running group member counts as alive").isTrue();
      assertThat(r.exitCode()).hasValue(0);
      assertThat(Procs.running(leftover)).isFalse();
    } finally {
      Procs.killQuietly(leftover);
    }
  }

  @Test
  void stopIsIdempotentAndReportsANaturalExit() throws Exception {
    TrainerProcess tp = TrainerProcess.start(spec("/bin/sh", "-c", "exit 7").build(),
        new Procs.Lines());
    assertThat(tp.waitFor()).isEqualTo(7);

    StopResult first = tp.stop();
    StopResult second = tp.stop();
    tp.close();

    assertThat(first.wasAlive()).isFalse();
    assertThat(first.killed()).isFalse();
    assertThat(first.exitCode()).hasValue(7);
    assertThat(second).isSameAs(first);
  }

  @Test
  void waitForWithTimeoutIsEmptyWhileTheTrainerRuns() throws Exception {
    try (TrainerProcess tp = TrainerProcess.start(spec("sleep", "60").build(), new Procs.Lines())) {
      assertThat(tp.waitFor(Duration.ofMillis(100))).isEmpty();
      assertThat(tp.isAlive()).isTrue();
      tp.stop();
      assertThat(tp.waitFor(Duration.ofSeconds(5))).isEqualTo(OptionalInt.of(128 + 15));
    }
  }

  @Test
  void trainerLeadsItsOwnSessionAndProcessGroup() throws Exception {
    assumeTrue(ProcessTools.system().setsid().isPresent(), "setsid is not installed");
    try (TrainerProcess tp = TrainerProcess.start(spec("sleep", "60").build(), new Procs.Lines())) {
      String[] s = Procs.stat(tp.pid());
      assertThat(s[2]).as("pgrp").isEqualTo(Long.toString(tp.pid()));
      assertThat(s[3]).as("session").isEqualTo(Long.toString(tp.pid()));
      assertThat(tp.ownsProcessGroup()).isTrue();
      assertThat(tp.launchedCommand()).endsWith("sleep", "60").contains("--pdeathsig", "KILL");
    }
  }

  /** The kernel behaviour the launcher thread exists for: without it this trainer would die. */
  @Test
  void trainerOutlivesTheShortLivedThreadThatStartedIt() throws Exception {
    assumeTrue(ProcessTools.system().setpriv().isPresent(), "setpriv is not installed");
    AtomicReference<TrainerProcess> box = new AtomicReference<>();
    AtomicReference<Exception> failure = new AtomicReference<>();
    Thread starter = new Thread(() -> {
      try {
        box.set(TrainerProcess.start(spec("sleep", "60").build(), new Procs.Lines()));
        Thread.sleep(LINGER_MILLIS);
      } catch (IOException | InterruptedException e) {
        failure.set(e);
      }
    });
    starter.start();
    starter.join();
    assertThat(failure.get()).isNull();
    try (TrainerProcess tp = box.get()) {
      assertThat(tp.diesWithSupervisor()).isTrue();
      // The control test below shows the kill comes within milliseconds; wait well past that.
      assertThat(tp.waitFor(Duration.ofMillis(700))).as("still running").isEmpty();
      assertThat(Procs.running(tp.pid())).isTrue();
    }
  }

  /** Control for the test above: a plain fork from a thread that ends is SIGKILLed at once. */
  @Test
  void plainForkFromAShortLivedThreadDiesWhenThatThreadEnds() throws Exception {
    ProcessTools tools = ProcessTools.system();
    assumeTrue(tools.setpriv().isPresent(), "setpriv is not installed");
    AtomicReference<Process> box = new AtomicReference<>();
    Thread starter = new Thread(() -> {
      try {
        box.set(new ProcessBuilder(tools.wrap(List.of("sleep", "60"))).start());
        Thread.sleep(LINGER_MILLIS);
      } catch (IOException | InterruptedException e) {
        throw new IllegalStateException(e);
      }
    });
    starter.start();
    starter.join();
    Process p = box.get();
    try {
      assertThat(p.waitFor(5, TimeUnit.SECONDS)).as("killed by its parent-death signal").isTrue();
      assertThat(p.exitValue()).isEqualTo(128 + 9);
    } finally {
      p.destroyForcibly();
    }
  }

  @Test
  void withoutSetsidTheStopWalksDescendantsAndSparesTheSupervisorsGroup() throws Exception {
    Procs.Lines lines = new Procs.Lines();
    long grandchild = -1;
    try (TrainerProcess tp = TrainerProcess.start(
        spec("/bin/sh", "-c", "sleep 300 & echo \"grandchild=$!\"; wait").build(), lines,
        ProcessTools.none())) {
      grandchild = lines.awaitPid("grandchild", WAIT);
      String ownGroup = Procs.stat(ProcessHandle.current().pid())[2];
      assertThat(Procs.stat(tp.pid())[2]).as("fallback: trainer in our group").isEqualTo(ownGroup);
      assertThat(tp.ownsProcessGroup()).isFalse();
      assertThat(tp.diesWithSupervisor()).isFalse();
      assertThat(tp.launchedCommand()).containsExactly("/bin/sh", "-c",
          "sleep 300 & echo \"grandchild=$!\"; wait");

      StopResult r = tp.stop();

      assertThat(r.wasAlive()).isTrue();
      assertThat(Procs.running(tp.pid())).isFalse();
      assertThat(Procs.running(grandchild)).isFalse();
      assertThat(ProcessHandle.current().isAlive()).isTrue();
    } finally {
      Procs.killQuietly(grandchild);
    }
  }

  @Test
  void restartStopsTheOldTreeAndStartsAFreshOneWithTheSameListener() throws Exception {
    Procs.Lines lines = new Procs.Lines();
    LaunchSpec first = spec("/bin/sh", "-c", "echo first; exec sleep 60").build();
    TrainerProcess old = TrainerProcess.start(first, lines);
    lines.await("first", WAIT);
    try (TrainerProcess fresh = old.restart(
        first.toBuilder().command("/bin/sh", "-c", "echo second; exec sleep 60").build())) {
      assertThat(old.stop().wasAlive()).as("the restart stopped the old tree").isTrue();
      assertThat(Procs.running(old.pid())).isFalse();
      assertThat(fresh.pid()).isNotEqualTo(old.pid());
      lines.await("second", WAIT);
      assertThat(fresh.isAlive()).isTrue();
    } finally {
      old.close();
    }
  }

  @Test
  void trainerDiesWhenTheSupervisorJvmIsSigkilled() throws Exception {
    assumeTrue(ProcessTools.system().setpriv().isPresent(), "setpriv is not installed");
    Process jvm = standIn("sigkill");
    List<Long> pids = new ArrayList<>();
    try {
      BufferedReader r = new BufferedReader(
          new InputStreamReader(jvm.getInputStream(), StandardCharsets.UTF_8));
      long trainer = -1;
      long ticker = -1;
      for (String line; (trainer < 0 || ticker < 0) && (line = r.readLine()) != null; ) {
        if (line.startsWith("trainer=")) {
          trainer = Long.parseLong(line.substring(8));
          pids.add(trainer);
        } else if (line.startsWith("ticker=")) {
          ticker = Long.parseLong(line.substring(7));
          pids.add(ticker);
        }
      }
      assertThat(trainer).as("stand-in reported the trainer").isPositive();
      assertThat(ticker).as("stand-in reported the ticker").isPositive();
      assertThat(Procs.running(trainer)).isTrue();

      jvm.destroyForcibly(); // SIGKILL: no shutdown hook runs
      assertThat(jvm.waitFor(10, TimeUnit.SECONDS)).isTrue();
      assertThat(jvm.exitValue()).isEqualTo(128 + 9);

      assertThat(Procs.awaitNotRunning(trainer, Duration.ofSeconds(5)))
          .as("trainer got its parent-death SIGKILL").isTrue();
      assertThat(Procs.awaitNotRunning(ticker, Duration.ofSeconds(5)))
          .as("a grandchild that writes dies of SIGPIPE on the dead pipe").isTrue();
    } finally {
      jvm.destroyForcibly();
      pids.forEach(Procs::killQuietly);
    }
  }

  @Test
  void anOrdinarySupervisorExitGivesTheTrainerTermAndItsGrace() throws Exception {
    Path marker = dir.resolve("got-term");
    Process jvm = standIn("exit", marker.toString());
    long trainer = -1;
    try {
      BufferedReader r = new BufferedReader(
          new InputStreamReader(jvm.getInputStream(), StandardCharsets.UTF_8));
      for (String line; (line = r.readLine()) != null; ) {
        if (line.startsWith("trainer=")) {
          trainer = Long.parseLong(line.substring(8));
        }
      }
      assertThat(jvm.waitFor(20, TimeUnit.SECONDS)).isTrue();
      assertThat(jvm.exitValue()).isZero();
      assertThat(trainer).isPositive();
      assertThat(Procs.running(trainer)).isFalse();
      assertThat(Files.readString(marker).trim())
          .as("the trainer's TERM handler ran: a stop, not a bare SIGKILL").isEqualTo("term");
    } finally {
      jvm.destroyForcibly();
      Procs.killQuietly(trainer);
    }
  }

  private Process standIn(String... args) throws IOException {
    List<String> argv = new ArrayList<>(List.of(
        Path.of(System.getProperty("java.home"), "bin", "java").toString(),
        "-Xshare:auto", "-XX:TieredStopAtLevel=1", "-Xmx64m",
        "-cp", System.getProperty("java.class.path"),
        SupervisorStandIn.class.getName()));
    argv.addAll(List.of(args));
    return new ProcessBuilder(argv).directory(dir.toFile())
        .redirectError(ProcessBuilder.Redirect.INHERIT).start();
  }
}
