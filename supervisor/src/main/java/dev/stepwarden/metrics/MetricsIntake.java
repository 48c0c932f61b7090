package dev.stepwarden.metrics;

import java.util.ArrayList;
import java.util.HashMap;
import java.util.HashSet;
import java.util.List;
import java.util.Map;
import java.util.Objects;
import java.util.Set;
import java.util.TreeSet;
import java.util.function.LongSupplier;
import java.util.regex.Pattern;

/**
 * Turns the lines of one source into {@link Sample}s following a {@link ReadPlan}.
 *
 * <p>Design: the format parser hands flat key/value pairs to a callback; the intake keeps only
 * the keys it wants (step, epoch, reported rate, applied revision and the configured series) in
 * a fixed slot array, so a line costs no map and no boxing until a {@link Sample} is made; a
 * parser that names keys by id (JSON) has them resolved to slots once, through an array, and is
 * told which keys' values nobody needs once their part in "keys seen" is settled. A line
 * without any configured series is counted as ignored (progress bars, warnings, tracebacks) but
 * still updates the reported rate and applied revision, which the steering layer uses to confirm
 * a change. When a line prints no step, the step is the shared axis's latest step (an
 * {@code also} source, see {@link MetricsSources}) or, for the main source, counted (one per line
 * that carries a series). Not thread-safe: one intake per source, driven by that source's thread
 * or under the caller's lock.
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

  private static final int KEYS_SEEN_MAX = 256;
  private static final long KEYS_SEEN_LINES = 10_000;
  private static final int STEP = 0;
  private static final int EPOCH = 1;
  private static final int RATE = 2;
  private static final int REVISION = 3;
  private static final int FIRST_SERIES = 4;
  private static final int[] NO_SLOTS = new int[0];

  private final ReadPlan plan;
  private final LineParser parser;
  private final LongSupplier sharedStep;
  /** Wanted key to slot indexes (one key may feed several slots, e.g. step and a series). */
  private final Map<String, int[]> slots = new HashMap<>();
  private final String[] seriesNames;
  private final double[] values;
  /** Per slot: the line (counted from 1) that last set it; 0 while its key never appeared. */
  private final long[] stamp;
  /**
   * By the parser's key id ({@link LineParser.Fields#put(int, String, double, byte[], int, int)}):
   * the key's slots, found in {@code slots} at its first sighting (null before, empty for a key
   * nobody wants).
   */
  private final int[][] slotsById = new int[KeyCache.MAX_ENTRIES][];
  /**
   * By key id: the key's part in keysSeen is settled (it was added, or never can be: the set is
   * full or its lines are over).
   */
  private final boolean[] seenById = new boolean[KeyCache.MAX_ENTRIES];
  /** By key id: no slots and seenById, so the parser need not convert its value any more. */
  private final boolean[] unwanted = new boolean[KeyCache.MAX_ENTRIES];
  private final Set<String> keysSeen = new HashSet<>();
  /** Per slot, for the current line: where its number is printed (valid JSON), or from = -1. */
  private final int[] textFrom;
  private final int[] textTo;
  private byte[] text;
  private final LineParser.Fields sink = new LineParser.Fields() {
    @Override
    public void put(String key, double value) {
      take(key, value, null, -1, -1);
    }

    @Override
    public void put(String key, double value, byte[] t, int from, int to) {
      take(key, value, t, from, to);
    }

    @Override
    public void put(int id, String key, double value, byte[] t, int from, int to) {
      take(id, key, value, t, from, to);
    }

    @Override
    public boolean wants(int id) {
      return !unwanted[id];
    }

    @Override
    public void ambiguous(String key) {
      ambiguous++;
    }
  };
  private long lines;
  private long metricLines;
  private long ignored;
  private long ambiguous;
  private long oversized;
  private long inferredStep;
  private long lastStep = -1;
  private double lastEpoch = Double.NaN;
  private int epochChanges;
  /** The names array of the last sample, shared by the next one of the same shape. */
  private String[] lastNames;
  private long lastShape;

  public MetricsIntake(ReadPlan plan) {
    this(plan, null);
  }

  /**
   * An intake whose lines without a step take {@code sharedStep} (the latest step on the run's
   * axis) instead of counting their own; null to count.
   */
  MetricsIntake(ReadPlan plan, LongSupplier sharedStep) {
    this(plan, sharedStep, parserFor(plan));
  }

  /** An intake reading with {@code parser} instead of its format's own (tests compare two). */
  MetricsIntake(ReadPlan plan, LongSupplier sharedStep, LineParser parser) {
    this.plan = Objects.requireNonNull(plan, "plan");
    this.sharedStep = sharedStep;
    this.parser = Objects.requireNonNull(parser, "parser");
    int n = FIRST_SERIES + plan.series().size();
    values = new double[n];
    stamp = new long[n];
    textFrom = new int[n];
    textTo = new int[n];
    seriesNames = plan.series().keySet().toArray(new String[0]);
    want(plan.stepKey(), STEP);
    want(plan.epochKey(), EPOCH);
    want(plan.rateKey(), RATE);
    want(ReadPlan.APPLIED_REVISION_KEY, REVISION);
    int i = FIRST_SERIES;
    for (String key : plan.series().values()) {
      want(key, i++);
    }
  }

  private static LineParser parserFor(ReadPlan plan) {
    return switch (plan.format()) {
      case JSON -> new JsonLineParser();
      case PAIRS -> new PairsLineParser();
      case PATTERN -> new PatternLineParser(plan.pattern());
      case CSV -> new CsvLineParser();
      case PYTHON_DICT -> new PythonDictLineParser();
      case TFRECORD -> new JsonLineParser(); // the event reader hands on JSON lines
    };
  }

  private void want(String key, int slot) {
    if (key == null) {
      return;
    }
    int[] old = slots.get(key);
    int[] now = old == null ? new int[] {slot} : java.util.Arrays.copyOf(old, old.length + 1);
    now[now.length - 1] = slot;
    slots.put(key, now);
  }

  private void take(String key, double v, byte[] t, int from, int to) {
    seen(key);
    int[] s = slots.get(key);
    if (s != null) {
      fill(s, v, t, from, to);
    }
  }

  /** Like {@link #take(String, double, byte[], int, int)}, the slots found by the key's id. */
  private void take(int id, String key, double v, byte[] t, int from, int to) {
    int[] s = slotsById[id];
    if (s == null) {
      s = slots.getOrDefault(key, NO_SLOTS);
      slotsById[id] = s;
    }
    if (!seenById[id]) {
      seen(key);
      seenById[id] = true; // added now, or it never will be: lines only grow, the set never shrinks
    }
    if (s.length > 0) {
      fill(s, v, t, from, to);
    } else {
      unwanted[id] = true;
    }
  }

  private void seen(String key) {
    if (lines <= KEYS_SEEN_LINES && keysSeen.size() < KEYS_SEEN_MAX) {
      keysSeen.add(key); // for the warning's "keys seen", which is given after 1000 lines
    }
  }

  private void fill(int[] s, double v, byte[] t, int from, int to) {
    for (int slot : s) {
      values[slot] = v;
      stamp[slot] = lines;
      textFrom[slot] = from;
      textTo[slot] = to;
    }
    if (t != null) {
      text = t;
    }
  }

  private boolean has(int slot) {
    return stamp[slot] == lines;
  }

  /**
   * Continues the step axis after a restart from a checkpoint taken at {@code step}: inferred
   * steps go on from there, backwards too after a rewind, just as a trainer that prints its step
   * prints the checkpoint's step + 1 next.
   */
  public void continueAfter(long step) {
    inferredStep = step;
    lastStep = step;
  }

  /** Like {@link #accept(String, long)} for a line the reader cut at the line limit. */
  public Reading accept(String line, long wallMillis, boolean cut) {
    if (cut) {
      oversized++;
      // The last token of a cut line may be a number cut short ("0.31" read as "0.3"): drop it.
      line = line.substring(0, wholeTokens(line));
    }
    return accept(line, wallMillis);
  }

  /** Length of {@code s} up to its last separator, so a token cut off at the end is left out. */
  static int wholeTokens(CharSequence s) {
    for (int i = s.length() - 1; i >= 0; i--) {
      char c = s.charAt(i);
      if (c == ' ' || c == '\t' || c == ',' || c == '|' || c == ';' || c == '}') {
        return i + 1;
      }
    }
    return 0;
  }

  private static int wholeTokens(byte[] b, int off, int len) {
    for (int i = off + len - 1; i >= off; i--) {
      byte c = b[i];
      if (c == ' ' || c == '\t' || c == ',' || c == '|' || c == ';' || c == '}') {
        return i + 1 - off;
      }
    }
    return 0;
  }

  public Reading accept(String line, long wallMillis) {
    lines++; // also the stamp of this line's slots
    if (!parser.parse(line, sink)) {
      ignored++;
      return null;
    }
    return read(wallMillis);
  }

  /**
   * Like {@link #accept(String, long, boolean)} for the UTF-8 line {@code b[off, off+len)}, read
   * in place where the format allows (JSON).
   */
  public Reading accept(byte[] b, int off, int len, long wallMillis, boolean cut) {
    if (cut) {
      oversized++;
      len = wholeTokens(b, off, len); // as for strings: no number cut short
    }
    lines++;
    if (!parser.parse(b, off, len, sink)) {
      ignored++;
      return null;
    }
    return read(wallMillis);
  }

  /**
   * Appends the value of {@code series} in the line just accepted as the trainer printed it,
   * when that text is a valid JSON number; returns false (appending nothing) otherwise. The
   * readable form of {@link #printedLength} and {@link #copyPrinted}, for tests.
   */
  boolean appendPrinted(String series, StringBuilder out) {
    int slot = printedSlot(series);
    if (slot < 0) {
      return false;
    }
    for (int k = textFrom[slot]; k < textTo[slot]; k++) {
      out.append((char) text[k]);
    }
    return true;
  }

  /**
   * The length of {@code series}'s number as printed in the line just accepted, when that text
   * is a valid JSON number; -1 otherwise. With {@link #copyPrinted} it lets the normalized file
   * carry numbers without formatting doubles again (the text parses back to the same double).
   */
  public int printedLength(String series) {
    int slot = printedSlot(series);
    return slot < 0 ? -1 : textTo[slot] - textFrom[slot];
  }

  /** Copies the text {@link #printedLength} measured into {@code out} from {@code at}. */
  public void copyPrinted(String series, byte[] out, int at) {
    int slot = printedSlot(series);
    if (slot < 0) {
      throw new IllegalStateException("no printed number for series '" + series + "'");
    }
    System.arraycopy(text, textFrom[slot], out, at, textTo[slot] - textFrom[slot]);
  }

  private int printedSlot(String series) {
    for (int i = 0; i < seriesNames.length; i++) {
      if (seriesNames[i].equals(series)) {
        int slot = FIRST_SERIES + i;
        return !has(slot) || textFrom[slot] < 0 || text == null ? -1 : slot;
      }
    }
    return -1;
  }

  private Reading read(long wallMillis) {
    SeriesValues sv = null;
    int count = 0;
    long shape = 0; // which series this line carried (the first 64)
    for (int i = FIRST_SERIES; i < values.length; i++) {
      if (has(i)) {
        count++;
        shape |= 1L << ((i - FIRST_SERIES) & 63);
      }
    }
    if (count > 0) {
      boolean same = shape == lastShape && lastNames != null && lastNames.length == count
          && seriesNames.length <= 64;
      String[] names = same ? lastNames : new String[count];
      double[] vals = new double[count];
      int k = 0;
      for (int i = FIRST_SERIES; i < values.length; i++) {
        if (has(i)) {
          if (!same) {
            names[k] = seriesNames[i - FIRST_SERIES];
          }
          vals[k++] = values[i];
        }
      }
      lastShape = shape;
      lastNames = names;
      sv = new SeriesValues(names, vals);
    }
    boolean rate = has(RATE);
    boolean revision = has(REVISION);
    Sample sample = null;
    if (sv != null) {
      metricLines++;
      long step;
      if (has(STEP) && Double.isFinite(values[STEP])) {
        step = (long) values[STEP];
        inferredStep = Math.max(inferredStep, step);
      } else if (sharedStep != null) {
        step = Math.max(0, sharedStep.getAsLong());
      } else {
        step = ++inferredStep;
      }
      lastStep = step;
      if (has(EPOCH) && Double.isFinite(values[EPOCH]) && values[EPOCH] != lastEpoch) {
        if (!Double.isNaN(lastEpoch)) {
          epochChanges++;
        }
        lastEpoch = values[EPOCH];
      }
      sample = new Sample(step, has(EPOCH) ? values[EPOCH] : Double.NaN, wallMillis, sv);
    } else {
      ignored++;
    }
    if (sample == null && !rate && !revision) {
      return null;
    }
    double rev = values[REVISION];
    return new Reading(sample, rate ? values[RATE] : Double.NaN,
        !revision || !Double.isFinite(rev) ? -1 : (long) rev);
  }

  public ReadPlan plan() {
    return plan;
  }

  public long lines() {
    return lines;
  }

  public long metricLines() {
    return metricLines;
  }

  /** Lines that carried none of the configured series. */
  /**
   * Values passed over because they read two ways ({@code loss=1,234.5}); such a value is
   * never taken as a shortened number.
   */
  public long ambiguousValues() {
    return ambiguous;
  }

  public long ignoredLines() {
    return ignored;
  }

  /** Lines that arrived cut at the line limit (they are still read, up to the cut). */
  public long oversizedLines() {
    return oversized;
  }

  public long lastStep() {
    return lastStep;
  }

  /** How often the epoch of this source's metric lines changed (0 without an epoch key). */
  public int epochChanges() {
    return epochChanges;
  }

  /** Whether some configured key has not appeared yet (no allocation: asked after each line). */
  public boolean missesKeys() {
    for (int i = FIRST_SERIES; i < stamp.length && i < FIRST_SERIES + seriesNames.length; i++) {
      if (stamp[i] == 0) {
        return true;
      }
    }
    return false;
  }

  /** The configured keys (series name to key) that have not appeared in any line so far. */
  public Map<String, String> missingKeys() {
    Map<String, String> out = new java.util.LinkedHashMap<>();
    int i = FIRST_SERIES;
    for (Map.Entry<String, String> e : plan.series().entrySet()) {
      if (stamp[i++] == 0) {
        out.put(e.getKey(), e.getValue());
      }
    }
    return out;
  }

  /** Configured series whose key has not appeared in any line so far. */
  public List<String> missingSeries() {
    List<String> out = new ArrayList<>();
    int i = FIRST_SERIES;
    for (Map.Entry<String, String> e : plan.series().entrySet()) {
      if (stamp[i++] == 0) { // never stamped: its key appeared in no line (lines count from 1)
        out.add(e.getKey() + " (key '" + e.getValue() + "')");
      }
    }
    return out;
  }

  /** Keys seen in metric lines (up to 256), sorted, for the "never appeared" warning. */
  public List<String> keysSeen() {
    return List.copyOf(new TreeSet<>(keysSeen));
  }
}
