package dev.stepwarden.process;

import java.io.IOException;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.time.Duration;
import java.util.ArrayList;
import java.util.List;
import java.util.concurrent.CountDownLatch;
import java.util.concurrent.TimeUnit;
import java.util.function.Predicate;

/** Test-side view of processes, read straight from /proc (independent of the code under test). */
final class Procs {
  private Procs() {}

  /** {state, ppid, pgrp, session} of a pid, or null when /proc has no entry. */
  static String[] stat(long pid) {
    try {
      String s = Files.readString(Path.of("/proc/" + pid + "/stat"), StandardCharsets.US_ASCII);
      String[] f = s.substring(s.lastIndexOf(')') + 2).split(" ");
      return new String[] {f[0], f[1], f[2], f[3]};
    } catch (IOException e) {
      return null;
    }
  }

  /** Exists and is not a zombie. */
  static boolean running(long pid) {
    String[] s = stat(pid);
    return s != null && !s[0].equals("Z") && !s[0].equals("X");
  }

  static boolean exists(long pid) {
    return Files.exists(Path.of("/proc/" + pid));
  }

  /** Polls until {@code p} holds for {@code pid} or the wait is over; returns whether it held. */
  static boolean await(long pid, Predicate<Long> p, Duration wait) throws InterruptedException {
    long deadline = System.nanoTime() + wait.toNanos();
    while (!p.test(pid)) {
      if (System.nanoTime() > deadline) {
        return false;
      }
      Thread.sleep(20);
    }
    return true;
  }

  static boolean awaitNotRunning(long pid, Duration wait) throws InterruptedException {
    return await(pid, q -> !running(q), wait);
  }

  /** Orphans are reaped by PID 1, which may take a moment (about 2 s on the test machine). */
  static boolean awaitVanished(long pid, Duration wait) throws InterruptedException {
    return await(pid, q -> !exists(q), wait);
  }

  /** Last-resort cleanup for a test that failed half-way: SIGKILL a pid the test itself caused. */
  static void killQuietly(long pid) {
    if (pid > 1 && pid != ProcessHandle.current().pid()) {
      ProcessHandle.of(pid).ifPresent(ProcessHandle::destroyForcibly);
    }
  }

  /** A thread-safe listener that keeps every line and can wait for a line to appear. */
  static final class Lines implements LineListener {
    private final List<String> out = new ArrayList<>();
    private final List<String> err = new ArrayList<>();
    private String awaited;
    private CountDownLatch latch;

    @Override
    public synchronized void onLine(TrainerStream stream, String line) {
      (stream == TrainerStream.STDOUT ? out : err).add(line);
      if (latch != null && line.startsWith(awaited)) {
        latch.countDown();
      }
    }

    synchronized List<String> out() {
      return List.copyOf(out);
    }

    synchronized List<String> err() {
      return List.copyOf(err);
    }

    /** Waits for a stdout or stderr line starting with {@code prefix}; returns it. */
    String await(String prefix, Duration wait) throws InterruptedException {
      CountDownLatch l;
      synchronized (this) {
        for (List<String> s : List.of(out, err)) {
          for (String line : s) {
            if (line.startsWith(prefix)) {
              return line;
            }
          }
        }
        awaited = prefix;
        latch = new CountDownLatch(1);
        l = latch;
      }
      if (!l.await(wait.toMillis(), TimeUnit.MILLISECONDS)) {
        throw new AssertionError("no line starting with '" + prefix + "' within " + wait
            + "; stdout=" + out() + " stderr=" + err());
      }
      synchronized (this) {
        latch = null;
        for (List<String> s : List.of(out, err)) {
          for (String line : s) {
            if (line.startsWith(prefix)) {
              return line;
            }
          }
        }
      }
      throw new AssertionError("unreachable");
    }

    long awaitPid(String key, Duration wait) throws InterruptedException {
      return Long.parseLong(await(key + "=", wait).substring(key.length() + 1).trim());
    }
  }
}
