package dev.stepwarden.metrics;

import java.util.ArrayList;
import java.util.HashMap;
import java.util.LinkedHashMap;
import java.util.List;
import java.util.Map;
import java.util.Objects;
import java.util.TreeSet;
import java.util.regex.Matcher;
import java.util.regex.Pattern;

/**
 * Turns trainer lines into {@link Sample}s following a {@link ReadPlan}.
 *
 * <p>Design: the format parser hands flat key/value pairs to a reusable map; the intake picks the
 * step, epoch, reported rate and the configured series out of it. A line without any configured
 * series is counted as ignored (progress bars, warnings, tracebacks) but still updates the
 * reported rate and applied revision, which the steering layer uses to confirm a change. When the
 * trainer prints no step, steps are counted (one per line that carries a series). Not
 * thread-safe: one intake per source, driven by that source's thread or under the caller's lock.
 */
public final class MetricsIntake {
  /** What one line said. {@code sample} is null when the line carried no configured series. */
  public record Reading(Sample sample, double reportedRate, long appliedRevision) {
    public boolean hasRate() {
      return !Double.isNaN(reportedRate);
    }

    public boolean hasRevision() {
      return appliedRevision >= 0;
    }
  }

  private final ReadPlan plan;
  private final LineParser parser;
  private final Map<String, Double> fields = new HashMap<>();
  private final TreeSet<String> keysSeen = new TreeSet<>();
  private long lines;
  private long metricLines;
  private long ignored;
  private long inferredStep;
  private long lastStep = -1;

  public MetricsIntake(ReadPlan plan) {
    this.plan = Objects.requireNonNull(plan, "plan");
    this.parser = switch (plan.format()) {
      case JSON -> new JsonLineParser();
      case PAIRS -> new PairsLineParser();
      case PATTERN -> new PatternLineParser(plan.pattern(), groupNames(plan.pattern()));
    };
  }

  /** Continues the step axis across a restart: inferred steps resume after {@code step}. */
  public void continueAfter(long step) {
    inferredStep = Math.max(inferredStep, step);
    lastStep = Math.max(lastStep, step);
  }

  public Reading accept(String line, long wallMillis) {
    lines++;
    fields.clear();
    if (!parser.parse(line, fields::put)) {
      ignored++;
      return null;
    }
    if (keysSeen.size() < 256) {
      keysSeen.addAll(fields.keySet());
    }
    Map<String, Double> values = null;
    for (Map.Entry<String, String> s : plan.series().entrySet()) {
      Double v = fields.get(s.getValue());
      if (v != null) {
        if (values == null) {
          values = new LinkedHashMap<>();
        }
        values.put(s.getKey(), v);
      }
    }
    Double rate = plan.rateKey() == null ? null : fields.get(plan.rateKey());
    Double revision = fields.get(ReadPlan.APPLIED_REVISION_KEY);
    Sample sample = null;
    if (values != null) {
      metricLines++;
      Double stepValue = fields.get(plan.stepKey());
      long step;
      if (stepValue != null && Double.isFinite(stepValue)) {
        step = (long) (double) stepValue;
        inferredStep = Math.max(inferredStep, step);
      } else {
        step = ++inferredStep;
      }
      lastStep = step;
      Double epoch = plan.epochKey() == null ? null : fields.get(plan.epochKey());
      sample = new Sample(step, epoch == null ? Double.NaN : epoch, wallMillis, values);
    } else {
      ignored++;
    }
    if (sample == null && rate == null && revision == null) {
      return null;
    }
    return new Reading(sample, rate == null ? Double.NaN : rate,
        revision == null || !Double.isFinite(revision) ? -1 : (long) (double) revision);
  }

  public long lines() {
    return lines;
  }

  public long metricLines() {
    return metricLines;
  }

  /** Lines that carried none of the configured series. */
  public long ignoredLines() {
    return ignored;
  }

  public long lastStep() {
    return lastStep;
  }

  /** Configured series whose key has not appeared in any line so far. */
  public List<String> missingSeries() {
    List<String> out = new ArrayList<>();
    plan.series().forEach((name, key) -> {
      if (!keysSeen.contains(key)) {
        out.add(name + " (key '" + key + "')");
      }
    });
    return out;
  }

  /** Keys seen in metric lines (up to 256), sorted, for the "never appeared" warning. */
  public List<String> keysSeen() {
    return List.copyOf(keysSeen);
  }

  private static List<String> groupNames(Pattern p) {
    List<String> names = new ArrayList<>();
    Matcher m = Pattern.compile("\\(\\?<([a-zA-Z][a-zA-Z0-9]*)>").matcher(p.pattern());
    while (m.find()) {
      names.add(m.group(1));
    }
    return names;
  }
}
