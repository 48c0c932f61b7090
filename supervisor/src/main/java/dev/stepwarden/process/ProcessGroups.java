package dev.stepwarden.process;

import java.io.File;
import java.io.IOException;
import java.nio.charset.StandardCharsets;
import java.nio.file.DirectoryStream;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.ArrayList;
import java.util.List;
import java.util.Optional;
import java.util.concurrent.TimeUnit;

/**
 * Process-group facts from {@code /proc} and group signals. A zombie counts as not running: it has
 * exited and only waits for its parent (or PID 1, for orphans) to reap it.
 */
final class ProcessGroups {
  private static final Path PROC = Path.of("/proc");

  private ProcessGroups() {}

  /** The fields of {@code /proc/PID/stat} this class needs. */
  record Stat(long pid, char state, long ppid, long pgrp, long session) {
    boolean running() {
      return state != 'Z' && state != 'X' && state != 'x';
    }
  }

  static Optional<Stat> stat(long pid) {
    try {
      byte[] raw = Files.readAllBytes(PROC.resolve(Long.toString(pid)).resolve("stat"));
      return Optional.of(parse(pid, new String(raw, StandardCharsets.US_ASCII)));
    } catch (IOException | RuntimeException e) {
      return Optional.empty(); // gone (or /proc absent): not running
    }
  }

  /** Parses after the last ')' because the command name itself may hold spaces and parentheses. */
  static Stat parse(long pid, String line) {
    int close = line.lastIndexOf(')');
    String[] f = line.substring(close + 2).split(" ", 5);
    return new Stat(pid, f[0].charAt(0), Long.parseLong(f[1]), Long.parseLong(f[2]),
        Long.parseLong(f[3]));
  }

  static boolean isRunning(long pid) {
    return stat(pid).map(Stat::running).orElse(false);
  }

  static boolean isRunning(ProcessHandle h) {
    return h.isAlive() && isRunning(h.pid()); // isAlive guards against pid reuse via start time
  }

  /** Running processes whose process group is {@code pgid}. */
  static List<Long> runningMembers(long pgid) {
    List<Long> out = new ArrayList<>();
    try (DirectoryStream<Path> dir = Files.newDirectoryStream(PROC)) {
      for (Path p : dir) {
        String name = p.getFileName().toString();
        if (name.isEmpty() || !Character.isDigit(name.charAt(0))) {
          continue;
        }
        long pid;
        try {
          pid = Long.parseLong(name);
        } catch (NumberFormatException e) {
          continue;
        }
        stat(pid).filter(s -> s.pgrp() == pgid && s.running()).ifPresent(s -> out.add(s.pid()));
      }
    } catch (IOException e) {
      // no /proc: nothing we can list
    }
    return out;
  }

  static boolean hasRunningMember(long pgid) {
    return !runningMembers(pgid).isEmpty();
  }

  /** The supervisor's own group: never to be signalled. */
  static long ownGroup() {
    return stat(ProcessHandle.current().pid()).map(Stat::pgrp).orElse(-1L);
  }

  /**
   * Sends {@code signal} (TERM or KILL) to every process of group {@code pgid}: with one
   * {@code kill -s SIG -- -PGID} when the kill binary is there (atomic, catches processes forked a
   * moment ago), else member by member from {@code /proc}. Refuses the supervisor's own group and
   * groups without running members (so a recycled id is never hit once our group is empty).
   */
  static void signalGroup(ProcessTools tools, long pgid, boolean kill) {
    if (pgid <= 1 || pgid == ownGroup()) {
      return;
    }
    List<Long> members = runningMembers(pgid);
    if (members.isEmpty()) {
      return;
    }
    if (tools.kill().isPresent()) {
      List<String> argv = List.of(tools.kill().get().toString(), "-s", kill ? "KILL" : "TERM", "--",
          "-" + pgid);
      try {
        Process p = new ProcessBuilder(argv)
            .redirectInput(new File("/dev/null"))
            .redirectOutput(ProcessBuilder.Redirect.DISCARD)
            .redirectError(ProcessBuilder.Redirect.DISCARD)
            .start();
        if (p.waitFor(2, TimeUnit.SECONDS)) {
          return;
        }
        p.destroyForcibly();
      } catch (IOException e) {
        // fall through to member-by-member
      } catch (InterruptedException e) {
        Thread.currentThread().interrupt();
      }
    }
    for (long pid : members) {
      ProcessHandle.of(pid).ifPresent(h -> signal(h, kill));
    }
  }

  static void signal(ProcessHandle h, boolean kill) {
    try {
      if (kill) {
        h.destroyForcibly();
      } else {
        h.destroy();
      }
    } catch (IllegalStateException | SecurityException e) {
      // the current process, or not ours to signal: skip
    }
  }
}
