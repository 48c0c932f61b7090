package dev.stepwarden.rules;

import dev.stepwarden.metrics.ReadPlan;
import java.nio.file.Path;
import java.time.Duration;
import java.util.Collections;
import java.util.LinkedHashMap;
import java.util.List;
import java.util.Map;
import java.util.Objects;
import java.util.Optional;

/**
 * A loaded, validated guard file. Immutable: every value has been checked and defaulted by
 * {@link GuardFiles#load(Path)}, so the rest of the supervisor never re-validates.
 */
public record GuardFile(Path source, Run run, ReadPlan read, Steer steer,
    Optional<Checkpoints> checkpoints, List<Guard> guards, Limits limits,
    Optional<Probe> probe) {

  public GuardFile {
    Objects.requireNonNull(run, "run");
    probe = probe == null ? Optional.empty() : probe;
    Objects.requireNonNull(read, "read");
    Objects.requireNonNull(steer, "steer");
    Objects.requireNonNull(limits, "limits");
    guards = List.copyOf(guards);
    checkpoints = checkpoints == null ? Optional.empty() : checkpoints;
  }

  /** A file without a rate probe. */
  public GuardFile(Path source, Run run, ReadPlan read, Steer steer,
      Optional<Checkpoints> checkpoints, List<Guard> guards, Limits limits) {
    this(source, run, read, steer, checkpoints, guards, limits, Optional.empty());
  }

  /** The same file with another run section (the demo and the queue adjust paths). */
  public GuardFile withRun(Run newRun) {
    return new GuardFile(source, newRun, read, steer, checkpoints, guards, limits, probe);
  }

  /** The same file with the command replaced (a command given after {@code --} wins). */
  public GuardFile withCommand(List<String> command) {
    return new GuardFile(source, run.withCommand(command), read, steer, checkpoints, guards,
        limits, probe);
  }

  /** The same file with other guards (the benchmark's unsupervised runs have none). */
  public GuardFile withGuards(List<Guard> newGuards) {
    return new GuardFile(source, run, read, steer, checkpoints, newGuards, limits, probe);
  }

  /** The same file with or without a rate probe. */
  public GuardFile withProbe(Optional<Probe> newProbe) {
    return new GuardFile(source, run, read, steer, checkpoints, guards, limits, newProbe);
  }

  /**
   * A learning-rate range test before the real run (Smith 2017, s3.3): the rate rises
   * geometrically from {@code from} to {@code to}, each rate held for {@code hold} training
   * samples, over at most {@code steps} rates; the usable range is read off the loss curve
   * ({@link RangeTest}) and the run starts from scratch at {@code pick} times its upper end.
   * With {@code branch > 0} the pick is then checked: three launches from scratch at the pick
   * x 1/2, 1 and 2 run {@code branch} training samples each, and the run starts at the rate of
   * the branch kept ({@code controller.BranchChoice}: successive halving, noise-aware).
   */
  public record Probe(double from, double to, int steps, int hold, double pick, int branch) {
    /** A probe without the check of its pick. */
    public Probe(double from, double to, int steps, int hold, double pick) {
      this(from, to, steps, hold, pick, 0);
    }
  }

  /**
   * What to launch.
   *
   * @param command argv template; {@code {learning_rate}}, {@code {resume_from}},
   *     {@code {skip_batches}}, {@code {attempt}} and {@code {run_dir}} are filled in at launch
   * @param workdir where the trainer runs; null means the supervisor's own working directory
   */
  public record Run(String name, List<String> command, double learningRate, Path workdir,
      Map<String, String> env, Duration stopGrace) {
    public Run {
      command = List.copyOf(command);
      env = Collections.unmodifiableMap(new LinkedHashMap<>(env));
    }

    Run withCommand(List<String> newCommand) {
      return new Run(name, newCommand, learningRate, workdir, env, stopGrace);
    }
  }

  /** How a new rate reaches the trainer. */
  public record Steer(Method by, Duration confirmWithin, boolean restartWhenUnconfirmed) {
    public enum Method { CONTROL_FILE, RESTART }
  }

  /** Which files are the trainer's checkpoints, and how many healthy ones the vault keeps. */
  public record Checkpoints(String watch, int keep) {}

  /**
   * One guard: a condition on one series, what to do, and how long to rest afterwards.
   *
   * @param thenWait evaluations of the watched series during which this guard does not fire again
   */
  public record Guard(String name, Condition when, List<Action> actions, int thenWait) {
    public Guard {
      actions = List.copyOf(actions);
    }

    /** True when any action takes the run back to a checkpoint. */
    public boolean rewinds() {
      return actions.stream().anyMatch(a -> a instanceof Action.Rewind);
    }
  }

  /**
   * A detector with its parameters, all validated and defaulted.
   *
   * @param detector the guard-file name of the detector ({@code flattens}, {@code rises}, ...)
   * @param series the series it watches
   * @param params parameter name to value (Double, Integer, String or Duration)
   */
  public record Condition(String detector, String series, Map<String, Object> params) {
    public Condition {
      params = Collections.unmodifiableMap(new LinkedHashMap<>(params));
    }

    public double number(String key) {
      return ((Number) params.get(key)).doubleValue();
    }

    public int integer(String key) {
      return ((Number) params.get(key)).intValue();
    }
  }

  /** What a guard does. The rate actions respect {@link Limits}; the floor is enforced centrally. */
  public sealed interface Action {
    record Scale(double factor) implements Action {}

    record SetRate(double rate) implements Action {}

    record Rewind(int skipBatches) implements Action {}

    /** End the run as a success (exit 3), naming the best checkpoint. */
    record Stop() implements Action {}

    /** End the run as given up (exit 4). */
    record GiveUp() implements Action {}
  }

  /**
   * Central limits.
   *
   * @param silence no metric for this long counts as a hang; {@link Duration#ZERO} turns it off
   * @param firstMetric the same before a launch's first metric (see {@link #startupSilence})
   */
  public record Limits(double minRate, double maxRate, int rewinds, int crashRestarts,
      Duration silence, Duration crashBackoff, Duration firstMetric) {
    /**
     * How long a launch may go without its first metric before it counts as hung: a trainer
     * loads data, compiles or waits for its devices before it prints anything, and a hang
     * watchdog that counted that time as silence would kill healthy runs. Never shorter than
     * {@code silence}; {@link Duration#ZERO} when there is no limit (silence off, or
     * {@code first_metric: 0}).
     */
    public Duration startupSilence() {
      if (silence.isZero() || firstMetric.isZero()) {
        return Duration.ZERO;
      }
      return firstMetric.compareTo(silence) < 0 ? silence : firstMetric;
    }
  }
}
