package dev.stepwarden.rules;

import java.io.IOException;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.List;
import java.util.Optional;
import java.util.Set;
import java.util.stream.Stream;

/**
 * What can be told about a training command before the night starts, beyond its program: whether
 * restart steering can reach it, and whether the script an interpreter is given exists. The
 * loader uses the first (a guard file whose rate changes could never arrive is refused); {@code
 * check} and {@code run} the second, against the working directory the run will use (a template
 * guard file may name a script that only exists where it is run).
 */
public final class CommandCheck {
  /** Interpreters whose first non-option word is the script they run. */
  private static final Set<String> INTERPRETERS = Set.of("python", "python2", "python3",
      "pythonw", "pypy", "pypy3", "bash", "sh", "dash", "zsh", "ksh", "perl", "ruby", "node",
      "Rscript", "julia", "lua");
  /** Options after which the next word is the option's value, not the script. */
  private static final Set<String> TAKES_VALUE = Set.of("-X", "-W", "-o", "-O", "--rcfile",
      "--init-file", "-I", "-r");
  /** Options after which there is no script at all (a module, inline code, standard input). */
  private static final Set<String> NO_SCRIPT = Set.of("-m", "-c", "-e", "-E", "-s", "-");

  private CommandCheck() {}

  /**
   * Under restart steering every launch carries its rate only through {@code {learning_rate}};
   * a command without it would run every launch at the rate it names while the audit log records
   * other rates.
   */
  public static Optional<String> rateUnreachable(List<String> command, GuardFile.Steer steer) {
    if (steer.by() != GuardFile.Steer.Method.RESTART || command.isEmpty()
        || command.stream().anyMatch(w -> w.contains("{learning_rate}"))) {
      return Optional.empty();
    }
    return Optional.of("steer.by: restart passes each new rate through {learning_rate}, and"
        + " the command has none, so every launch would run at the rate the command names;"
        + " add it to the command (e.g. --lr \"{learning_rate}\"), or steer by control-file");
  }

  /**
   * The script argument of a known interpreter ({@code python3 -u train.py}) when it does not
   * exist relative to {@code workdir} (null: the current folder), with the nearest file name.
   */
  public static Optional<String> missingScript(List<String> command, Path workdir) {
    if (command.size() < 2) {
      return Optional.empty();
    }
    String program = Path.of(command.get(0)).getFileName().toString();
    if (!INTERPRETERS.contains(program) && !program.matches("python3\\.\\d+")) {
      return Optional.empty();
    }
    for (int i = 1; i < command.size(); i++) {
      String w = command.get(i);
      if (NO_SCRIPT.contains(w) || w.contains("{")) {
        return Optional.empty();
      }
      if (TAKES_VALUE.contains(w)) {
        i++;
        continue;
      }
      if (w.startsWith("-")) {
        if (w.startsWith("-c") || w.startsWith("-m")) {
          return Optional.empty(); // -cCODE, -mmodule
        }
        continue;
      }
      Path dir = workdir == null ? Path.of("") : workdir;
      Path script = dir.resolve(w);
      if (Files.exists(script)) {
        return Optional.empty();
      }
      return Optional.of("the script '" + w + "' that " + program + " is to run does not exist"
          + " in " + dir.toAbsolutePath().normalize() + nearest(script) + "; fix its name, or"
          + " set run.workdir (or start stepwarden in) the folder that holds it");
    }
    return Optional.empty();
  }

  private static String nearest(Path script) {
    Path parent = script.getParent() == null ? Path.of("") : script.getParent();
    String name = script.getFileName().toString();
    try (Stream<Path> s = Files.list(parent.toString().isEmpty() ? Path.of(".") : parent)) {
      List<String> names = s.limit(10_000).map(p -> p.getFileName().toString()).toList();
      String hint = GuardFiles.suggestion(name, names);
      return hint.isEmpty() ? "" : " (" + hint.substring(2) + ")";
    } catch (IOException | RuntimeException e) {
      return " (the folder cannot be listed: " + e.getMessage() + ")";
    }
  }
}
