package dev.stepwarden.metrics;

import java.nio.file.Files;
import java.nio.file.Path;
import java.time.Duration;
import java.util.ArrayList;
import java.util.List;
import java.util.Map;
import java.util.Objects;
import java.util.Optional;

/**
 * Every metrics source of a run, read at once onto one step axis: the main source of the
 * {@link ReadPlan} and its {@code also} sources, one {@link MetricsIntake} each.
 *
 * <p>Design: the supervisor's pump threads (stdout, stderr) and the {@link FileFollower} threads
 * of file sources all call {@link #accept} with a source index, under the supervisor's lock (this
 * class is not thread-safe itself). A line of an {@code also} source without a step takes the
 * latest step any source reported, so a validation value printed without a step lands where
 * training is. The "configured key never appeared" warning is produced once.
 */
public final class MetricsSources implements AutoCloseable {
  /** Receives a line of a followed file source. */
  @FunctionalInterface
  public interface FileLines {
    void line(int source, String line, boolean cut);
  }

  private final ReadPlan plan;
  private final List<ReadPlan> sources;
  private final List<MetricsIntake> intakes = new ArrayList<>();
  /** How to stop each follower (line files and event files alike). */
  private final List<Runnable> followers = new ArrayList<>();
  private final Path[] resolved;
  private boolean warned;

  public MetricsSources(ReadPlan plan) {
    this.plan = Objects.requireNonNull(plan, "plan");
    this.sources = plan.sources();
    this.resolved = new Path[sources.size()];
    for (int i = 0; i < sources.size(); i++) {
      intakes.add(new MetricsIntake(sources.get(i), i == 0 ? null : this::lastStep));
    }
  }

  public ReadPlan plan() {
    return plan;
  }

  /** One intake per source, the main source first. */
  public List<MetricsIntake> intakes() {
    return List.copyOf(intakes);
  }

  public MetricsIntake main() {
    return intakes.get(0);
  }

  /** Indexes of the sources that read the trainer's {@code stream} (STDOUT or STDERR). */
  public int[] sourcesOf(ReadPlan.Source stream) {
    return java.util.stream.IntStream.range(0, sources.size())
        .filter(i -> sources.get(i).source() == stream).toArray();
  }

  /** Feeds one line of source {@code source}; see {@link MetricsIntake#accept(String, long)}. */
  public MetricsIntake.Reading accept(int source, String line, long wallMillis, boolean cut) {
    return intakes.get(source).accept(line, wallMillis, cut);
  }

  /** Feeds the UTF-8 line {@code b[off, off+len)} of source {@code source}, read in place. */
  public MetricsIntake.Reading accept(int source, byte[] b, int off, int len, long wallMillis,
      boolean cut) {
    return intakes.get(source).accept(b, off, len, wallMillis, cut);
  }

  /** See {@link MetricsIntake#printedLength}. */
  public int printedLength(int source, String series) {
    return intakes.get(source).printedLength(series);
  }

  /** See {@link MetricsIntake#copyPrinted}. */
  public void copyPrinted(int source, String series, byte[] out, int at) {
    intakes.get(source).copyPrinted(series, out, at);
  }

  /**
   * Starts a {@link FileFollower} for every file source (relative paths against {@code workdir});
   * each delivers to {@code sink} on its own thread.
   */
  public synchronized void follow(Path workdir, Duration interval, FileLines sink) {
    if (!followers.isEmpty()) {
      throw new IllegalStateException("already following");
    }
    for (int i = 0; i < sources.size(); i++) {
      ReadPlan p = sources.get(i);
      if (p.source() != ReadPlan.Source.FILE) {
        continue;
      }
      Path f = workdir.resolve(p.file());
      resolved[i] = f;
      int index = i;
      if (p.format() == ReadPlan.Format.TFRECORD) {
        followers.add(new EventFileFollower(f, interval, p.stepKey(),
            line -> sink.line(index, line, false)).start()::close);
      } else {
        followers.add(new FileFollower(f, interval, p.lineLimit(),
            (line, cut) -> sink.line(index, line, cut)).start()::close);
      }
    }
  }

  /** The latest step on the shared axis (-1 before any). */
  public long lastStep() {
    long s = -1;
    for (MetricsIntake in : intakes) {
      s = Math.max(s, in.lastStep());
    }
    return s;
  }

  /** Continues every source's step axis after a restart from {@code step}. */
  public void continueAfter(long step) {
    intakes.forEach(in -> in.continueAfter(step));
  }

  // Loops, not streams: the supervisor asks after every metric line.
  public long lines() {
    long n = 0;
    for (int i = 0; i < intakes.size(); i++) {
      n += intakes.get(i).lines();
    }
    return n;
  }

  public long metricLines() {
    long n = 0;
    for (int i = 0; i < intakes.size(); i++) {
      n += intakes.get(i).metricLines();
    }
    return n;
  }

  public long ignoredLines() {
    long n = 0;
    for (int i = 0; i < intakes.size(); i++) {
      n += intakes.get(i).ignoredLines();
    }
    return n;
  }

  public long oversizedLines() {
    return intakes.stream().mapToLong(MetricsIntake::oversizedLines).sum();
  }

  /**
   * The "configured key never appeared" warning, at most once per run. Early for a source that
   * prints epochs: once its epoch changed {@code EPOCHS_BEFORE_WARNING} times while other keys
   * arrived, a per-epoch validation key should have shown; else after {@code afterLines} lines in
   * all. It names the source, the missing key, the keys the source did print and the nearest of
   * them; empty before that moment and for ever after.
   */
  public Optional<String> missingKeysWarning(long afterLines) {
    if (warned) {
      return Optional.empty();
    }
    boolean early = false;
    for (int i = 0; i < intakes.size(); i++) {
      MetricsIntake in = intakes.get(i);
      early |= in.epochChanges() >= EPOCHS_BEFORE_WARNING && in.missesKeys();
    }
    if (!early && lines() < afterLines) {
      return Optional.empty();
    }
    warned = true;
    List<String> parts = new ArrayList<>();
    for (int i = 0; i < intakes.size(); i++) {
      MetricsIntake in = intakes.get(i);
      Map<String, String> missing = in.missingKeys();
      if (missing.isEmpty()) {
        continue;
      }
      StringBuilder b = new StringBuilder();
      List<String> seen = in.keysSeen();
      for (Map.Entry<String, String> m : missing.entrySet()) {
        b.append(b.length() == 0 ? "" : "; ").append("series ").append(m.getKey()).append(": ")
            .append(describe(i)).append(" never printed key '").append(m.getValue()).append("'");
        Nearest.of(m.getValue(), seen).ifPresent(n -> b.append(" (did you mean '").append(n)
            .append("'?)"));
      }
      b.append(in.epochChanges() > 0 ? " in " + (in.epochChanges() + 1) + " epochs" : "")
          .append(" (").append(in.lines()).append(" lines read)");
      if (resolved[i] != null && !Files.exists(resolved[i])) {
        b.append("; the file does not exist");
      } else if (in.lines() == 0) {
        b.append("; it gave no line at all");
      } else {
        b.append("; keys it printed: ").append(seen.isEmpty() ? "none" : String.join(", ", seen));
      }
      parts.add(b.toString());
    }
    return parts.isEmpty() ? Optional.empty() : Optional.of(String.join("; ", parts)
        + "; fix read.series in the guard file (or what the trainer prints)");
  }

  /** Epoch changes of a source after which a key still missing is warned about. */
  static final int EPOCHS_BEFORE_WARNING = 2;

  private String describe(int i) {
    ReadPlan p = sources.get(i);
    return switch (p.source()) {
      case STDOUT -> "stdout";
      case STDERR -> "stderr";
      case FILE -> "file " + (resolved[i] != null ? resolved[i] : p.file());
    };
  }

  /** Stops the file followers (each delivers what was written before). */
  @Override
  public synchronized void close() {
    followers.forEach(Runnable::run);
    followers.clear();
  }
}
