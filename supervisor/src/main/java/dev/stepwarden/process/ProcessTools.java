package dev.stepwarden.process;

import java.io.File;
import java.io.IOException;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.ArrayList;
import java.util.List;
import java.util.Optional;
import java.util.concurrent.TimeUnit;

/**
 * The OS helpers the launcher relies on, found at fixed absolute paths (never through PATH, so a
 * trainer's environment cannot swap them): util-linux {@code setsid} (own session and process
 * group), {@code setpriv --pdeathsig} (die with the supervisor) and {@code kill} (signal a group).
 * They are probed once by running them (all three in one chain, else each alone), so a present
 * but unusable binary (seccomp, a stripped-down variant without the options) counts as absent and
 * the launcher falls back.
 */
record ProcessTools(Optional<Path> setsid, Optional<Path> setpriv, Optional<Path> kill) {
  private static final List<String> SETSID = List.of("/usr/bin/setsid", "/bin/setsid");
  private static final List<String> SETPRIV = List.of("/usr/bin/setpriv", "/bin/setpriv");
  private static final List<String> KILL = List.of("/bin/kill", "/usr/bin/kill");

  /** No helpers at all: the plain-JDK fallback (tests use it to exercise that path). */
  static ProcessTools none() {
    return new ProcessTools(Optional.empty(), Optional.empty(), Optional.empty());
  }

  /** The helpers of this machine, probed on first use and then cached. */
  static ProcessTools system() {
    return Detected.TOOLS;
  }

  /** The argv actually executed: {@code setpriv --pdeathsig KILL -- setsid -- argv...}. */
  List<String> wrap(List<String> argv) {
    List<String> out = new ArrayList<>(argv.size() + 6);
    setpriv.ifPresent(p -> {
      out.add(p.toString());
      out.add("--pdeathsig");
      out.add("KILL");
      out.add("--");
    });
    setsid.ifPresent(p -> {
      // No -w: a JVM child is never a group leader, so setsid calls setsid(2) and execs in place.
      out.add(p.toString());
      out.add("--");
    });
    out.addAll(argv);
    return out;
  }

  private static final class Detected {
    static final ProcessTools TOOLS = detect();

    private static ProcessTools detect() {
      Optional<Path> setsid0 = find(SETSID);
      Optional<Path> setpriv0 = find(SETPRIV);
      Optional<Path> kill0 = find(KILL);
      // The usual case in one process instead of three (each probe is a fork and exec, and
      // this runs before the first launch): the very chain a launch uses, ending in kill.
      if (setsid0.isPresent() && setpriv0.isPresent() && kill0.isPresent()
          && probe(List.of(setpriv0.get().toString(), "--pdeathsig", "KILL", "--",
              setsid0.get().toString(), "--", kill0.get().toString(), "-s", "0", "--",
              Long.toString(ProcessHandle.current().pid())))) {
        return new ProcessTools(setsid0, setpriv0, kill0);
      }
      // Else each on its own, so one unusable helper does not cost the others.
      Optional<Path> setsid = setsid0.filter(p -> probe(
          List.of(p.toString(), "--", "/bin/sh", "-c", ":")));
      Optional<Path> setpriv = setpriv0.filter(p -> probe(
          List.of(p.toString(), "--pdeathsig", "KILL", "--", "/bin/sh", "-c", ":")));
      Optional<Path> kill = kill0.filter(p -> probe(List.of(p.toString(), "-s", "0", "--",
          Long.toString(ProcessHandle.current().pid()))));
      return new ProcessTools(setsid, setpriv, kill);
    }

    private static Optional<Path> find(List<String> candidates) {
      for (String c : candidates) {
        Path p = Path.of(c);
        if (Files.isRegularFile(p) && Files.isExecutable(p)) {
          return Optional.of(p);
        }
      }
      return Optional.empty();
    }

    private static boolean probe(List<String> argv) {
      try {
        Process p = new ProcessBuilder(argv)
            .redirectInput(new File("/dev/null"))
            .redirectOutput(ProcessBuilder.Redirect.DISCARD)
            .redirectError(ProcessBuilder.Redirect.DISCARD)
            .start();
        if (!p.waitFor(5, TimeUnit.SECONDS)) {
          p.destroyForcibly();
          return false;
        }
        return p.exitValue() == 0;
      } catch (IOException e) {
        return false;
      } catch (InterruptedException e) {
        Thread.currentThread().interrupt();
        return false;
      }
    }
  }
}
