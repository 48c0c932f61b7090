package dev.stepwarden.replay;

import dev.stepwarden.metrics.EventFileFollower;
import dev.stepwarden.metrics.MetricsIntake;
import dev.stepwarden.metrics.ReadPlan;
import dev.stepwarden.engine.Decision;
import dev.stepwarden.engine.GuardEngine;
import dev.stepwarden.rules.GuardFile;
import java.io.BufferedReader;
import java.io.IOException;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.ArrayList;
import java.util.LinkedHashMap;
import java.util.List;
import java.util.Locale;
import java.util.Map;
import java.util.Optional;

/**
 * Dry-runs a guard file over a recorded metrics file: when would each guard have fired, and why.
 *
 * <p>Design: the live {@link GuardEngine} and {@link MetricsIntake} do all the work, fed line by
 * line from the file instead of from a trainer; there is no second implementation of any rule.
 * Three inputs are understood: a run directory's normalized metrics (read through a plan that
 * maps each series onto itself, with {@code t} as the wall time and {@code lr} as the rate the
 * live run was at), a raw trainer log read through the guard file's own read plan, and CSV (a
 * header row names the columns; each row is handed to the intake as a JSON object).
 *
 * <p>Honesty: the file records one course of the run. Once the replay takes an action the
 * recorded run did not take (a different rate, or a rewind the file does not show), the rest of
 * the curve no longer shows what would have happened, and every later decision is marked
 * hypothetical. With normalized metrics the recorded rate is known, so a replay of the very
 * guards that ran live stays on the recorded course; a raw log does not say what the supervisor
 * decided, so the first action that changes the rate (or rewinds) leaves the recorded course.
 */
public final class Replay {
  /** How the input file was read. */
  public enum Input {
    /** A run directory's metrics.jsonl, as the supervisor wrote it. */
    NORMALIZED,
    /** A trainer's own output, read through the guard file's read plan. */
    RAW,
    /** Values separated by commas, semicolons or tabs, with a header row naming the columns. */
    CSV,
    /** An event file of TFRecord-framed summaries; scalar tags are the keys. */
    EVENTS
  }

  /**
   * One decision the guards would have made.
   *
   * @param decision the engine's decision, unchanged
   * @param hypothetical true when the replay had already left the recorded course
   * @param recordedRate the rate the recorded run was at on that sample (NaN when unknown)
   */
  public record Fired(Decision decision, boolean hypothetical, double recordedRate) {}

  /**
   * What the replay found.
   *
   * @param input how the file was read
   * @param lines lines read
   * @param samples samples fed to the engine
   * @param ignoredLines lines that carried no configured series
   * @param ambiguousValues values passed over because they read two ways ({@code 1,234.5})
   * @param fired the decisions in order
   * @param departedAtStep the step from which the recorded curve no longer shows what would
   *     have happened, or -1 when the replay never left the recorded course
   * @param departure why it left the recorded course, or empty
   * @param endedAtStep the step where a decision would have ended the run (-1: it ran to the end)
   * @param unreadLines lines after such an ending, not fed
   * @param nanos time spent, for the throughput figure
   */
  public record Result(Input input, long lines, long samples, long ignoredLines,
      long ambiguousValues, List<Fired> fired, long departedAtStep, String departure, long endedAtStep,
      long unreadLines, long nanos) {
    public Result {
      fired = List.copyOf(fired);
    }

    public Optional<Fired> first() {
      return fired.isEmpty() ? Optional.empty() : Optional.of(fired.get(0));
    }

    public double samplesPerSecond() {
      return nanos <= 0 ? Double.NaN : samples * 1e9 / nanos;
    }
  }

  private Replay() {}

  /** Replays {@code file}, detecting how to read it. */
  public static Result run(GuardFile rules, Path file) throws IOException {
    requireFile(file);
    return run(rules, file, detect(file));
  }

  private static void requireFile(Path file) throws IOException {
    if (!Files.isRegularFile(file)) {
      throw new IOException("cannot read " + file + ": no such file (give a run directory's "
          + "metrics.jsonl or a trainer log)");
    }
  }

  /** Replays {@code file} read as {@code input}. */
  public static Result run(GuardFile rules, Path file, Input requested) throws IOException {
    requireFile(file);
    // a guard file that reads an event file reads it as one, however the name looks
    Input input = requested == Input.RAW && rules.read().format() == ReadPlan.Format.TFRECORD
        ? Input.EVENTS : requested;
    long start = System.nanoTime();
    GuardEngine engine = new GuardEngine(rules);
    ReadPlan plan = switch (input) {
      case NORMALIZED -> normalizedPlan(rules.read());
      case RAW -> rules.read();
      case CSV -> withFormat(rules.read(), ReadPlan.Format.CSV);
      case EVENTS -> withFormat(rules.read(), ReadPlan.Format.TFRECORD);
    };
    MetricsIntake intake = new MetricsIntake(plan);
    List<Fired> fired = new ArrayList<>();
    long lines = 0;
    long departedAt = -1;
    String departure = "";
    long endedAt = -1;
    long unread = 0;
    boolean awaitingRewind = false;
    long rewindStep = 0;
    long previousStep = Long.MIN_VALUE;
    try (LineSource r = lines(file, input, plan)) {
      String line;
      while ((line = r.next()) != null) {
        if (endedAt >= 0) {
          unread++;
          continue;
        }
        lines++;
        long millis = input == Input.NORMALIZED ? wallTime(line) : 0;
        MetricsIntake.Reading reading = intake.accept(line, millis);
        if (reading == null || reading.sample() == null) {
          continue;
        }
        long step = reading.sample().step();
        double recorded = input == Input.NORMALIZED && reading.hasRate() ? reading.reportedRate()
            : Double.NaN;
        if (departedAt < 0) {
          String why = null;
          if (awaitingRewind && step > rewindStep) {
            why = "the replay rewound at step " + rewindStep + " but the recorded run went on to"
                + " step " + step;
          } else if (!Double.isNaN(recorded) && !same(recorded, engine.rate())) {
            why = "at step " + step + " the recorded run was at rate " + recorded
                + " but the replay at " + engine.rate();
          }
          if (why != null) {
            departedAt = step;
            departure = why;
          }
        }
        if (awaitingRewind && step <= previousStep) {
          awaitingRewind = false; // the recording shows the jump back too
        }
        previousStep = step;
        Optional<Decision> d = engine.onSample(reading.sample());
        if (d.isEmpty()) {
          continue;
        }
        Decision decision = d.get();
        fired.add(new Fired(decision, departedAt >= 0, recorded));
        if (decision.ending() != Decision.Ending.CONTINUE) {
          endedAt = step;
          continue;
        }
        if (departedAt >= 0) {
          continue;
        }
        boolean leaves = decision.changesRate() || decision.rewinds();
        if (leaves && input != Input.NORMALIZED) {
          departedAt = step;
          departure = "the replay " + describe(decision) + " at step " + step + "; the recorded"
              + " log does not say what the live run did";
        } else if (decision.rewinds()) {
          awaitingRewind = true;
          rewindStep = step;
        }
      }
    }
    if (awaitingRewind && departedAt < 0 && endedAt < 0) {
      departedAt = rewindStep;
      departure = "the replay rewound at step " + rewindStep + " but the recording ends there";
    }
    return new Result(input, lines, engine.samples(), intake.ignoredLines(),
        intake.ambiguousValues(), fired, departedAt,
        departure, endedAt, unread, System.nanoTime() - start);
  }

  /** The lines of the recorded file: text lines, or the JSON lines of an event file's events. */
  private interface LineSource extends AutoCloseable {
    String next() throws IOException;

    @Override
    void close() throws IOException;
  }

  private static LineSource lines(Path file, Input input, ReadPlan plan) throws IOException {
    if (input == Input.EVENTS) {
      List<String> events = new ArrayList<>();
      EventFileFollower.readAll(file, plan.stepKey(), events::add);
      java.util.Iterator<String> it = events.iterator();
      return new LineSource() {
        @Override
        public String next() {
          return it.hasNext() ? it.next() : null;
        }

        @Override
        public void close() {}
      };
    }
    BufferedReader r = Files.newBufferedReader(file, StandardCharsets.UTF_8);
    return new LineSource() {
      @Override
      public String next() throws IOException {
        return r.readLine();
      }

      @Override
      public void close() throws IOException {
        r.close();
      }
    };
  }

  /** The guard file's plan read from the recorded file in {@code format}. */
  private static ReadPlan withFormat(ReadPlan p, ReadPlan.Format format) {
    return new ReadPlan(ReadPlan.Source.FILE, p.file() != null ? p.file() : Path.of("recorded"),
        format, null, p.stepKey(), p.epochKey(), p.rateKey(), p.series());
  }

  private static String describe(Decision d) {
    if (d.rewinds()) {
      return "rewound" + (d.changesRate() ? " and set the rate to " + d.rateAfter() : "");
    }
    return (d.rateAfter() < d.rateBefore() ? "lowered" : "raised") + " the rate to "
        + d.rateAfter();
  }

  private static boolean same(double a, double b) {
    return Math.abs(a - b) <= 1e-9 * Math.max(Math.abs(a), Math.abs(b));
  }

  /** The plan for our own normalized file: every series under its own name. */
  static ReadPlan normalizedPlan(ReadPlan original) {
    Map<String, String> series = new LinkedHashMap<>();
    for (String name : original.series().keySet()) {
      series.put(name, name);
    }
    return new ReadPlan(ReadPlan.Source.STDOUT, null, ReadPlan.Format.JSON, null, "step",
        "epoch", "lr", series);
  }

  /** The {@code "t":millis} field the supervisor writes third on every normalized line. */
  static long wallTime(String line) {
    int i = line.indexOf("\"t\":");
    if (i < 0) {
      return 0;
    }
    long v = 0;
    for (int k = i + 4; k < line.length(); k++) {
      char c = line.charAt(k);
      if (c < '0' || c > '9') {
        break;
      }
      v = v * 10 + (c - '0');
    }
    return v;
  }

  /**
   * How to read {@code file}: an event file by its name or its first record's header; normalized
   * when its first line carries our {@code step}, {@code t} and {@code lr} keys; CSV by extension
   * or when the first line is a bare list of names (perhaps quoted) separated by commas,
   * semicolons or tabs;
   * otherwise raw, through the guard file's read plan.
   */
  public static Input detect(Path file) throws IOException {
    String name = file.getFileName().toString().toLowerCase(Locale.ROOT);
    if (name.startsWith(EventFileFollower.PREFIX) || EventFileFollower.looksLikeEvents(file)) {
      return Input.EVENTS;
    }
    if (name.endsWith(".csv") || name.endsWith(".tsv")) {
      return Input.CSV;
    }
    String first = null;
    try (BufferedReader r = Files.newBufferedReader(file, StandardCharsets.UTF_8)) {
      String line;
      while ((line = r.readLine()) != null) {
        if (!line.isBlank()) {
          first = line.strip();
          break;
        }
      }
    } catch (java.nio.charset.MalformedInputException e) {
      return Input.RAW;
    }
    if (first == null) {
      return Input.RAW;
    }
    if (first.startsWith("{\"step\":") && first.contains("\"t\":") && first.contains("\"lr\":")) {
      return Input.NORMALIZED;
    }
    if (first.startsWith("\uFEFF")) {
      first = first.substring(1);
    }
    String column = "\"?[A-Za-z_][A-Za-z0-9_ ./-]*\"?";
    if (first.matches(column + "([,;\\t]" + column + ")+")) {
      return Input.CSV;
    }
    return Input.RAW;
  }
}
