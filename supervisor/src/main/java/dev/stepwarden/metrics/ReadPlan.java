package dev.stepwarden.metrics;

import java.nio.file.Path;
import java.util.ArrayList;
import java.util.Collections;
import java.util.LinkedHashMap;
import java.util.List;
import java.util.Map;
import java.util.Objects;
import java.util.regex.Pattern;

/**
 * Where the trainer's metrics come from and how its keys map onto the guard file's series.
 *
 * <p>A plan describes its own source; {@code also} lists further sources read at the same time
 * (for example training loss on stdout, validation values in a CSV file), each with its own
 * format and series. Series names are unique across all of them: {@link #allSeries()}.
 *
 * @param source stdout, stderr or a followed file
 * @param file the followed file when {@code source} is {@link Source#FILE}, else null
 * @param format how each line is written
 * @param pattern the user's regular expression with named groups, for {@link Format#PATTERN}
 * @param stepKey the trainer's key for the step counter; when a line lacks it, steps are counted
 * @param epochKey the trainer's key for the epoch
 * @param rateKey the trainer's key for the learning rate it is using (confirms a change)
 * @param series series name (train, validation, ...) to the trainer's key, in file order
 * @param lineLimit longest line read, in chars; the rest of a longer line is dropped and counted
 * @param also further sources, read alongside this one (never nested further)
 */
public record ReadPlan(Source source, Path file, Format format, Pattern pattern, String stepKey,
    String epochKey, String rateKey, Map<String, String> series, int lineLimit,
    List<ReadPlan> also) {

  public enum Source { STDOUT, STDERR, FILE }

  /**
   * How a source is written. {@code PYTHON_DICT}: a Python dict literal a line; {@code TFRECORD}:
   * an event file of TFRecord-framed summaries (a file source only, read as records, not lines).
   */
  public enum Format { JSON, PAIRS, PATTERN, CSV, PYTHON_DICT, TFRECORD }

  /** The key a trainer prints to confirm it applied a control-file revision. */
  public static final String APPLIED_REVISION_KEY = "applied_revision";

  /** Default line limit: 1 Mi chars, the process layer's default too. */
  public static final int DEFAULT_LINE_LIMIT = 1 << 20;

  public ReadPlan {
    Objects.requireNonNull(source, "source");
    Objects.requireNonNull(format, "format");
    Objects.requireNonNull(stepKey, "stepKey");
    if (series == null || series.isEmpty()) {
      throw new IllegalArgumentException("a read plan needs at least one series");
    }
    if (source == Source.FILE && file == null) {
      throw new IllegalArgumentException("source FILE needs a file");
    }
    if (format == Format.TFRECORD && source != Source.FILE) {
      throw new IllegalArgumentException("format TFRECORD reads a file, not " + source);
    }
    if (format == Format.PATTERN && pattern == null) {
      throw new IllegalArgumentException("format PATTERN needs a pattern");
    }
    if (lineLimit < 16) {
      throw new IllegalArgumentException("line limit must be at least 16 chars, was " + lineLimit);
    }
    Map<String, String> named = new LinkedHashMap<>();
    // interned, so the samples' lookups by the usual names ("train") match on identity first
    series.forEach((n, k) -> named.put(n == null ? null : n.intern(), k));
    series = Collections.unmodifiableMap(named);
    also = also == null ? List.of() : List.copyOf(also);
    Map<String, String> owner = new LinkedHashMap<>();
    series.keySet().forEach(n -> owner.put(n, "the main source"));
    for (ReadPlan a : also) {
      if (!a.also().isEmpty()) {
        throw new IllegalArgumentException("an 'also' source cannot have further 'also' sources");
      }
      for (String n : a.series().keySet()) {
        if (owner.putIfAbsent(n, "an 'also' source") != null) {
          throw new IllegalArgumentException("series '" + n + "' is read from two sources;"
              + " each series comes from one source");
        }
      }
    }
  }

  /** One source, the default line limit, no further sources (the original shape). */
  public ReadPlan(Source source, Path file, Format format, Pattern pattern, String stepKey,
      String epochKey, String rateKey, Map<String, String> series) {
    this(source, file, format, pattern, stepKey, epochKey, rateKey, series, DEFAULT_LINE_LIMIT,
        List.of());
  }

  /** This plan and its {@code also} sources, this one first. */
  public List<ReadPlan> sources() {
    List<ReadPlan> out = new ArrayList<>(1 + also.size());
    out.add(this);
    out.addAll(also);
    return out;
  }

  /** Every series of every source, series name to key, this plan's first. */
  public Map<String, String> allSeries() {
    Map<String, String> out = new LinkedHashMap<>(series);
    also.forEach(a -> out.putAll(a.series()));
    return Collections.unmodifiableMap(out);
  }
}
