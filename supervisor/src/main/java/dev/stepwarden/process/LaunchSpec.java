package dev.stepwarden.process;

import java.nio.file.Files;
import java.nio.file.Path;
import java.time.Duration;
import java.util.ArrayList;
import java.util.Collections;
import java.util.LinkedHashMap;
import java.util.List;
import java.util.Map;
import java.util.Objects;
import java.util.Optional;

/**
 * How to launch one trainer: its argv (run directly, never through a shell), working directory,
 * extra environment, log files and stop grace. Immutable; built with {@link #builder()}, whose
 * setters reject bad values at once with a message naming the value and the fix.
 */
public final class LaunchSpec {
  /** Default wait between TERM and KILL: long enough for a trainer to write a final checkpoint. */
  public static final Duration DEFAULT_STOP_GRACE = Duration.ofSeconds(10);

  /** Default longest line handed to the listener: 1 MiB. */
  public static final int DEFAULT_MAX_LINE_CHARS = 1 << 20;

  /** Upper bound for {@code maxLineChars}: each stream keeps at most one such line in memory. */
  public static final int MAX_MAX_LINE_CHARS = 64 << 20;

  private final List<String> command;
  private final Path workingDirectory;
  private final Map<String, String> environment;
  private final Path stdoutLog;
  private final Path stderrLog;
  private final boolean echo;
  private final Duration stopGrace;
  private final int maxLineChars;

  private LaunchSpec(Builder b) {
    this.command = List.copyOf(b.command);
    this.workingDirectory = b.workingDirectory;
    this.environment = Collections.unmodifiableMap(new LinkedHashMap<>(b.environment));
    this.stdoutLog = b.stdoutLog;
    this.stderrLog = b.stderrLog;
    this.echo = b.echo;
    this.stopGrace = b.stopGrace;
    this.maxLineChars = b.maxLineChars;
  }

  public static Builder builder() {
    return new Builder();
  }

  /** A builder holding this spec's values, for a variant (for example a restart with new args). */
  public Builder toBuilder() {
    Builder b = new Builder();
    b.command = new ArrayList<>(command);
    b.workingDirectory = workingDirectory;
    b.environment = new LinkedHashMap<>(environment);
    b.stdoutLog = stdoutLog;
    b.stderrLog = stderrLog;
    b.echo = echo;
    b.stopGrace = stopGrace;
    b.maxLineChars = maxLineChars;
    return b;
  }

  /** The trainer's argv exactly as given (without the setsid/setpriv wrapping). */
  public List<String> command() {
    return command;
  }

  public Path workingDirectory() {
    return workingDirectory;
  }

  /** Variables added on top of the supervisor's own environment (insertion order kept). */
  public Map<String, String> environment() {
    return environment;
  }

  public Optional<Path> stdoutLog() {
    return Optional.ofNullable(stdoutLog);
  }

  public Optional<Path> stderrLog() {
    return Optional.ofNullable(stderrLog);
  }

  /** Whether lines are copied to the supervisor's own stdout/stderr. */
  public boolean echo() {
    return echo;
  }

  public Duration stopGrace() {
    return stopGrace;
  }

  /**
   * Longest line handed to the listener, counted in bytes of the raw line (equal to characters for
   * the ASCII text metric lines are made of; a line of multi-byte characters is cut earlier).
   */
  public int maxLineChars() {
    return maxLineChars;
  }

  @Override
  public boolean equals(Object o) {
    return o instanceof LaunchSpec s
        && command.equals(s.command)
        && workingDirectory.equals(s.workingDirectory)
        && environment.equals(s.environment)
        && Objects.equals(stdoutLog, s.stdoutLog)
        && Objects.equals(stderrLog, s.stderrLog)
        && echo == s.echo
        && stopGrace.equals(s.stopGrace)
        && maxLineChars == s.maxLineChars;
  }

  @Override
  public int hashCode() {
    return Objects.hash(command, workingDirectory, environment, stdoutLog, stderrLog, echo,
        stopGrace, maxLineChars);
  }

  @Override
  public String toString() {
    return "LaunchSpec[command=" + command + ", workingDirectory=" + workingDirectory
        + ", environment=" + environment.keySet() + ", stdoutLog=" + stdoutLog
        + ", stderrLog=" + stderrLog + ", echo=" + echo + ", stopGrace=" + stopGrace
        + ", maxLineChars=" + maxLineChars + "]";
  }

  /** Fail-fast builder: each setter checks its value; {@link #build()} checks the combination. */
  public static final class Builder {
    private List<String> command;
    private Path workingDirectory;
    private Map<String, String> environment = new LinkedHashMap<>();
    private Path stdoutLog;
    private Path stderrLog;
    private boolean echo = true;
    private Duration stopGrace = DEFAULT_STOP_GRACE;
    private int maxLineChars = DEFAULT_MAX_LINE_CHARS;

    private Builder() {}

    /** The trainer program and its arguments; passed to the OS verbatim (no shell). */
    public Builder command(List<String> argv) {
      if (argv == null || argv.isEmpty()) {
        throw new IllegalArgumentException("LaunchSpec.command: the argv is " + argv
            + "; give the trainer program and its arguments, for example [python3, train.py]");
      }
      for (int i = 0; i < argv.size(); i++) {
        String a = argv.get(i);
        if (a == null) {
          throw new IllegalArgumentException("LaunchSpec.command: argument " + i + " of " + argv
              + " is null; remove it or give a value (an empty string is allowed)");
        }
        if (a.indexOf('\0') >= 0) {
          throw new IllegalArgumentException("LaunchSpec.command: argument " + i
              + " contains a NUL character, which no OS argv can carry; remove it");
        }
      }
      if (argv.get(0).isBlank()) {
        throw new IllegalArgumentException("LaunchSpec.command: the program name (argument 0) of "
            + argv + " is blank; put the executable first, for example python3");
      }
      this.command = new ArrayList<>(argv);
      return this;
    }

    /** Convenience for {@link #command(List)}. */
    public Builder command(String... argv) {
      return command(argv == null ? null : java.util.Arrays.asList(argv));
    }

    /** Directory the trainer starts in; must exist. Defaults to the supervisor's own. */
    public Builder workingDirectory(Path dir) {
      if (dir == null) {
        throw new IllegalArgumentException(
            "LaunchSpec.workingDirectory: null; give an existing directory such as the run dir");
      }
      Path abs = dir.toAbsolutePath().normalize();
      if (!Files.isDirectory(abs)) {
        throw new IllegalArgumentException("LaunchSpec.workingDirectory: " + abs
            + (Files.exists(abs) ? " is not a directory" : " does not exist")
            + "; create it first or point to an existing directory");
      }
      this.workingDirectory = abs;
      return this;
    }

    /** Variables added on top of the inherited environment (a later call adds to earlier ones). */
    public Builder environment(Map<String, String> vars) {
      if (vars == null) {
        throw new IllegalArgumentException("LaunchSpec.environment: null; give an empty map instead");
      }
      Map<String, String> checked = new LinkedHashMap<>();
      for (Map.Entry<String, String> e : vars.entrySet()) {
        String k = e.getKey();
        String v = e.getValue();
        if (k == null || k.isEmpty() || k.indexOf('=') >= 0 || k.indexOf('\0') >= 0) {
          throw new IllegalArgumentException("LaunchSpec.environment: the variable name '" + k
              + "' is not usable (empty, or contains '=' or NUL); use a plain name like MY_VAR");
        }
        if (v == null || v.indexOf('\0') >= 0) {
          throw new IllegalArgumentException("LaunchSpec.environment: the value of " + k + " is "
              + (v == null ? "null" : "carrying a NUL character")
              + "; give a plain string (an empty string is allowed)");
        }
        checked.put(k, v);
      }
      this.environment.putAll(checked);
      return this;
    }

    /** Raw stdout bytes are appended here; the file is created with mode 0600 when absent. */
    public Builder stdoutLog(Path file) {
      this.stdoutLog = checkLog("stdoutLog", file);
      return this;
    }

    /** Raw stderr bytes are appended here; the file is created with mode 0600 when absent. */
    public Builder stderrLog(Path file) {
      this.stderrLog = checkLog("stderrLog", file);
      return this;
    }

    /** Copy each line to the supervisor's own stdout/stderr (default on). */
    public Builder echo(boolean on) {
      this.echo = on;
      return this;
    }

    /** Wait between TERM and KILL (default 10 s); zero means KILL right after TERM. */
    public Builder stopGrace(Duration grace) {
      if (grace == null || grace.isNegative()) {
        throw new IllegalArgumentException("LaunchSpec.stopGrace: " + grace
            + " is not a usable wait; give zero or a positive duration such as PT10S");
      }
      this.stopGrace = grace;
      return this;
    }

    /** Longest line handed to the listener (default 1 MiB); longer lines are cut and counted. */
    public Builder maxLineChars(int max) {
      if (max < 1 || max > MAX_MAX_LINE_CHARS) {
        throw new IllegalArgumentException("LaunchSpec.maxLineChars: " + max
            + " is outside 1.." + MAX_MAX_LINE_CHARS + "; the default is " + DEFAULT_MAX_LINE_CHARS);
      }
      this.maxLineChars = max;
      return this;
    }

    public LaunchSpec build() {
      if (command == null) {
        throw new IllegalStateException(
            "LaunchSpec: no command set; call command(List) with the trainer's argv");
      }
      if (workingDirectory == null) {
        workingDirectory(Path.of(""));
      }
      if (stdoutLog != null && stdoutLog.equals(stderrLog)) {
        throw new IllegalStateException("LaunchSpec: stdoutLog and stderrLog are both " + stdoutLog
            + "; give each stream its own file (two appenders would interleave mid-line)");
      }
      return new LaunchSpec(this);
    }

    private static Path checkLog(String what, Path file) {
      if (file == null) {
        return null;
      }
      Path abs = file.toAbsolutePath().normalize();
      if (Files.isDirectory(abs)) {
        throw new IllegalArgumentException("LaunchSpec." + what + ": " + abs
            + " is a directory; give a file path inside it, for example " + abs.resolve("trainer.log"));
      }
      Path parent = abs.getParent();
      if (parent == null || !Files.isDirectory(parent)) {
        throw new IllegalArgumentException("LaunchSpec." + what + ": the directory " + parent
            + " of " + abs + " does not exist; create it first");
      }
      return abs;
    }
  }
}
