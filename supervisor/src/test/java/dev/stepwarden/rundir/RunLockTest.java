package dev.stepwarden.rundir;

import static org.assertj.core.api.Assertions.assertThat;
import static org.assertj.core.api.Assertions.assertThatThrownBy;
import static org.junit.jupiter.api.Assumptions.assumeTrue;

import java.nio.file.Files;
import java.nio.file.Path;
import java.util.concurrent.TimeUnit;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;

class RunLockTest {
  @TempDir Path tmp;

  @Test
  void aSecondHolderInTheSameProcessIsRefusedAndTheLockIsFreeAfterClose() throws Exception {
    try (RunLock first = RunLock.acquire(tmp)) {
      assertThatThrownBy(() -> RunLock.acquire(tmp))
          .isInstanceOf(RunBusyException.class)
          .hasMessageContaining("process " + ProcessHandle.current().pid());
      assertThat(RunLock.liveHolder(first.runDir())).isPresent();
    }
    assertThat(RunLock.liveHolder(tmp)).isEmpty();
    RunLock.acquire(tmp).close();
  }

  /**
   * Another process holding the POSIX record lock (Python's fcntl.lockf is the same fcntl lock the
   * JVM takes) blocks us, and its kill -9 frees the run at once: the kernel drops the lock.
   */
  @Test
  void anotherProcessHoldsTheRunUntilItIsKilled() throws Exception {
    Path file = tmp.resolve(RunLock.FILE);
    Process holder;
    try {
      holder = new ProcessBuilder("python3", "-c", "import fcntl,sys,time\n"
          + "f=open(sys.argv[1],'r+' if __import__('os').path.exists(sys.argv[1]) else 'w+')\n"
          + "fcntl.lockf(f, fcntl.LOCK_EX|fcntl.LOCK_NB)\n"
          + "f.write('process 99999 on elsewhere (since then)\\n'); f.flush()\n"
          + "print('locked', flush=True)\n"
          + "time.sleep(120)\n", file.toString()).redirectErrorStream(true).start();
    } catch (java.io.IOException e) {
      holder = null;
    }
    assumeTrue(holder != null, "python3 is available");
    try {
      String first = new String(holder.getInputStream().readNBytes(7));
      assertThat(first).isEqualTo("locked\n");
      assertThatThrownBy(() -> RunLock.acquire(tmp))
          .isInstanceOf(RunBusyException.class)
          .hasMessageContaining("process 99999 on elsewhere");
      assertThat(RunLock.liveHolder(tmp)).contains("process 99999 on elsewhere (since then)");
    } finally {
      holder.destroyForcibly();
      assertThat(holder.waitFor(10, TimeUnit.SECONDS)).isTrue();
    }
    try (RunLock l = RunLock.acquire(tmp)) {
      assertThat(l.runDir()).isEqualTo(tmp.toAbsolutePath().normalize());
      assertThat(Files.readString(file)).contains("process " + ProcessHandle.current().pid());
    }
  }

  @Test
  void aLinkPlantedUnderTheLockNameIsRefusedAndItsTargetUntouched() throws Exception {
    Path target = tmp.resolve("precious.txt");
    Files.writeString(target, "keep me");
    Path run = Files.createDirectory(tmp.resolve("run"));
    Files.createSymbolicLink(run.resolve(RunLock.FILE), target);
    assertThatThrownBy(() -> RunLock.acquire(run))
        .hasMessageContaining(RunLock.FILE).hasMessageContaining("symbolic link");
    assertThat(Files.readString(target)).isEqualTo("keep me");
    assertThat(RunLock.liveHolder(tmp.resolve("elsewhere"))).isEmpty();
  }
}
