package dev.stepwarden.metrics;

import java.nio.file.Path;
import java.util.Collections;
import java.util.LinkedHashMap;
import java.util.Map;
import java.util.Objects;
import java.util.regex.Pattern;

/**
 * Where the trainer's metrics come from and how its keys map onto the guard file's series.
 *
 * @param source stdout, stderr or a followed file
 * @param file the followed file when {@code source} is {@link Source#FILE}, else null
 * @param format how each line is written
 * @param pattern the user's regular expression with named groups, for {@link Format#PATTERN}
 * @param stepKey the trainer's key for the step counter; when a line lacks it, steps are counted
 * @param epochKey the trainer's key for the epoch
 * @param rateKey the trainer's key for the learning rate it is using (confirms a change)
 * @param series series name (train, validation, ...) to the trainer's key, in file order
 */
public record ReadPlan(Source source, Path file, Format format, Pattern pattern, String stepKey,
    String epochKey, String rateKey, Map<String, String> series) {

  public enum Source { STDOUT, STDERR, FILE }

  public enum Format { JSON, PAIRS, PATTERN }

  /** The key a trainer prints to confirm it applied a control-file revision. */
  public static final String APPLIED_REVISION_KEY = "applied_revision";

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
    if (format == Format.PATTERN && pattern == null) {
      throw new IllegalArgumentException("format PATTERN needs a pattern");
    }
    series = Collections.unmodifiableMap(new LinkedHashMap<>(series));
  }
}
