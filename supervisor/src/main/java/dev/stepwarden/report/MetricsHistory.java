package dev.stepwarden.report;

import java.io.BufferedReader;
import java.io.IOException;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.ArrayList;
import java.util.LinkedHashMap;
import java.util.List;
import java.util.Map;
import tools.jackson.core.JacksonException;
import tools.jackson.core.JsonParser;
import tools.jackson.core.JsonToken;
import tools.jackson.core.json.JsonReadFeature;
import tools.jackson.databind.json.JsonMapper;

/**
 * The run's curves, decimated so that the page stays small however long the night was.
 *
 * <p>Design: each series keeps at most about {@code 2 * target} buckets of consecutive samples;
 * a bucket remembers its minimum and maximum with their steps (min/max per bucket), so a
 * one-sample spike survives decimation. When the buckets overflow, neighbours are merged in pairs
 * and the bucket width doubles: memory is bounded while the file is read once, front to back.
 * The step axis may go back (a rewind, or a restart from a checkpoint): each such jump starts a
 * new segment, buckets never span two segments, and the jumps are kept to be drawn.
 */
final class MetricsHistory {
  static final int DEFAULT_TARGET = 600;
  private static final int MAX_RATE_POINTS = 20_000;
  private static final int MAX_NON_FINITE_MARKS = 200;
  private static final JsonMapper MAPPER = JsonMapper.builder()
      .enable(JsonReadFeature.ALLOW_NON_NUMERIC_NUMBERS)
      .build();

  /** A bucket of consecutive samples of one series within one segment. */
  record Bucket(int segment, long count, long firstStep, long lastStep, long minStep, double min,
      long maxStep, double max) {}

  /** Where the step axis went back: from the last step before the jump to the first after it. */
  record Jump(long sampleIndex, long fromStep, long toStep, long wallMillis) {}

  /** The rate in force from {@code step} on (within {@code segment}). */
  record RatePoint(int segment, long step, double rate) {}

  /** A non-finite value, kept to be marked on the chart. */
  record NonFinite(String series, long step, String value) {}

  static final class Series {
    private final int target;
    private final List<Bucket> buckets = new ArrayList<>();
    private long width = 1;
    private Bucket open;
    long count;
    long nonFinite;

    Series(int target) {
      this.target = target;
    }

    void add(int segment, long step, double v) {
      count++;
      if (open != null && (open.segment() != segment || open.count() >= width)) {
        close();
      }
      if (open == null) {
        open = new Bucket(segment, 1, step, step, step, v, step, v);
        return;
      }
      Bucket b = open;
      open = new Bucket(segment, b.count() + 1, b.firstStep(), step,
          v < b.min() ? step : b.minStep(), Math.min(v, b.min()),
          v > b.max() ? step : b.maxStep(), Math.max(v, b.max()));
    }

    private void close() {
      buckets.add(open);
      open = null;
      if (buckets.size() >= 2 * target) {
        compact();
      }
    }

    private void compact() {
      List<Bucket> merged = new ArrayList<>(buckets.size() / 2 + 8);
      int i = 0;
      while (i < buckets.size()) {
        Bucket a = buckets.get(i);
        if (i + 1 < buckets.size() && buckets.get(i + 1).segment() == a.segment()) {
          merged.add(merge(a, buckets.get(i + 1)));
          i += 2;
        } else {
          merged.add(a);
          i++;
        }
      }
      buckets.clear();
      buckets.addAll(merged);
      width *= 2;
    }

    private static Bucket merge(Bucket a, Bucket b) {
      boolean minA = a.min() <= b.min();
      boolean maxA = a.max() >= b.max();
      return new Bucket(a.segment(), a.count() + b.count(), a.firstStep(), b.lastStep(),
          minA ? a.minStep() : b.minStep(), minA ? a.min() : b.min(),
          maxA ? a.maxStep() : b.maxStep(), maxA ? a.max() : b.max());
    }

    /** The buckets, the open one included, in file order. */
    List<Bucket> buckets() {
      List<Bucket> out = new ArrayList<>(buckets);
      if (open != null) {
        out.add(open);
      }
      return out;
    }
  }

  private final int target;
  private final Map<String, Series> series = new LinkedHashMap<>();
  private final List<Jump> jumps = new ArrayList<>();
  private final List<RatePoint> rates = new ArrayList<>();
  private final List<NonFinite> nonFinite = new ArrayList<>();
  private long samples;
  private long badLines;
  private int segment;
  private long lastStep = Long.MIN_VALUE;
  private long maxStep = Long.MIN_VALUE;
  private long minStep = Long.MAX_VALUE;
  private long firstMillis = -1;
  private long lastMillis = -1;
  private double lastRate = Double.NaN;
  private double bestValidation = Double.NaN;
  private long bestValidationStep = -1;

  MetricsHistory(int target) {
    this.target = target;
  }

  /** Reads a normalized metrics file; a missing file gives an empty history. */
  static MetricsHistory read(Path file, int target) throws IOException {
    MetricsHistory h = new MetricsHistory(target);
    if (!Files.isRegularFile(file)) {
      return h;
    }
    try (BufferedReader r = Files.newBufferedReader(file, StandardCharsets.UTF_8)) {
      String line;
      Map<String, Double> values = new LinkedHashMap<>();
      while ((line = r.readLine()) != null) {
        if (line.isBlank()) {
          continue;
        }
        values.clear();
        if (!parse(line, values)) {
          h.badLines++;
          continue;
        }
        h.accept(values);
      }
    }
    return h;
  }

  /** Parses one flat normalized line; "nan"/"inf"/"-inf" strings are the non-finite values. */
  static boolean parse(String line, Map<String, Double> out) {
    try (JsonParser p = MAPPER.createParser(line)) {
      if (p.nextToken() != JsonToken.START_OBJECT) {
        return false;
      }
      JsonToken t;
      while ((t = p.nextToken()) == JsonToken.PROPERTY_NAME) {
        String name = p.currentName();
        JsonToken v = p.nextToken();
        if (v == JsonToken.VALUE_NUMBER_INT || v == JsonToken.VALUE_NUMBER_FLOAT) {
          out.put(name, p.getDoubleValue());
        } else if (v == JsonToken.VALUE_STRING) {
          String s = p.getString();
          if (s.equals("nan")) {
            out.put(name, Double.NaN);
          } else if (s.equals("inf")) {
            out.put(name, Double.POSITIVE_INFINITY);
          } else if (s.equals("-inf")) {
            out.put(name, Double.NEGATIVE_INFINITY);
          }
        } else {
          p.skipChildren();
        }
      }
      return t == JsonToken.END_OBJECT && out.containsKey("step");
    } catch (JacksonException e) {
      // Lines written without their closing brace still carry whole fields (the intake's own
      // JSON parser is as lenient); anything else is a torn or edited line: counted, not fatal.
      return out.containsKey("step") && !line.stripTrailing().endsWith("}");
    }
  }

  void accept(Map<String, Double> values) {
    long step = (long) (double) values.get("step");
    Double t = values.get("t");
    long millis = t == null ? -1 : (long) (double) t;
    if (lastStep != Long.MIN_VALUE && step < lastStep) {
      segment++;
      jumps.add(new Jump(samples, lastStep, step, millis));
    }
    samples++;
    lastStep = step;
    maxStep = Math.max(maxStep, step);
    minStep = Math.min(minStep, step);
    if (millis >= 0) {
      if (firstMillis < 0) {
        firstMillis = millis;
      }
      lastMillis = millis;
    }
    Double lr = values.get("lr");
    if (lr != null && Double.isFinite(lr) && rates.size() < MAX_RATE_POINTS) {
      RatePoint last = rates.isEmpty() ? null : rates.get(rates.size() - 1);
      if (last == null || last.segment() != segment || Double.compare(lr, lastRate) != 0) {
        rates.add(new RatePoint(segment, step, lr));
      }
      lastRate = lr;
    }
    for (Map.Entry<String, Double> e : values.entrySet()) {
      String name = e.getKey();
      if (name.equals("step") || name.equals("epoch") || name.equals("t") || name.equals("lr")) {
        continue;
      }
      double v = e.getValue();
      Series s = series.computeIfAbsent(name, n -> new Series(target));
      if (!Double.isFinite(v)) {
        s.nonFinite++;
        if (nonFinite.size() < MAX_NON_FINITE_MARKS) {
          nonFinite.add(new NonFinite(name, step, Double.isNaN(v) ? "nan" : v > 0 ? "inf"
              : "-inf"));
        }
        continue;
      }
      s.add(segment, step, v);
      if (name.equals("validation") && (Double.isNaN(bestValidation) || v < bestValidation)) {
        bestValidation = v;
        bestValidationStep = step;
      }
    }
  }

  Map<String, Series> series() {
    return series;
  }

  Series series(String name) {
    return series.get(name);
  }

  List<Jump> jumps() {
    return jumps;
  }

  List<RatePoint> rates() {
    return rates;
  }

  List<NonFinite> nonFinite() {
    return nonFinite;
  }

  long samples() {
    return samples;
  }

  long badLines() {
    return badLines;
  }

  long minStep() {
    return samples == 0 ? 0 : minStep;
  }

  long maxStep() {
    return samples == 0 ? 0 : maxStep;
  }

  long lastStep() {
    return samples == 0 ? -1 : lastStep;
  }

  long firstMillis() {
    return firstMillis;
  }

  long lastMillis() {
    return lastMillis;
  }

  double bestValidation() {
    return bestValidation;
  }

  long bestValidationStep() {
    return bestValidationStep;
  }

  int target() {
    return target;
  }
}
