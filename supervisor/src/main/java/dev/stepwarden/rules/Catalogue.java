package dev.stepwarden.rules;

import dev.stepwarden.stats.Prechelt;
import java.util.LinkedHashMap;
import java.util.List;
import java.util.Map;

/**
 * Every key the guard file accepts, in one place: the loader, {@code check} and {@code schema}
 * all read from here. Adding a key means adding it here and reading it in {@link GuardFiles}.
 */
final class Catalogue {
  private Catalogue() {}

  static final List<String> TOP = List.of("run", "read", "steer", "checkpoints", "guards",
      "limits", "probe");

  static final List<Key> PROBE = List.of(
      Key.number("from", 1e-5, Double.MIN_NORMAL, 1e6, "The rate the range test starts at."),
      Key.number("to", 10.0, Double.MIN_NORMAL, 1e6, "The rate it ends at (it stops sooner"
          + " when the loss runs away)."),
      Key.integer("steps", 40, 4, 100_000, "How many rates, spaced geometrically from 'from'"
          + " to 'to'."),
      Key.integer("hold", 2, 1, 100_000, "Training samples each rate is held for (after the"
          + " trainer confirmed it)."),
      Key.number("pick", 0.3, 1e-6, 1, "The run starts at this fraction of the range's upper"
          + " end (the rate where the smoothed loss was lowest before it turned ragged or"
          + " rose)."));

  static final List<Key> RUN = List.of(
      Key.text("name", null, "A name for the run, used in reports (default: the file's name)."),
      Key.list("command", "The training command as a list of words (never run through a shell)."
          + " Placeholders: {learning_rate}, {resume_from}, {skip_batches}, {attempt}, {run_dir}."
          + " May instead be given after '--' on the command line."),
      Key.number("learning_rate", null, Double.MIN_NORMAL, 1e6,
          "The learning rate the run starts with."),
      Key.text("workdir", null, "Working directory of the trainer (default: where stepwarden"
          + " was started)."),
      Key.map("env", "Extra environment variables for the trainer."),
      Key.duration("stop_grace", "30s", "How long the trainer may take to exit after TERM"
          + " before it is killed."));

  /** The values of read.format, each a {@code ReadPlan.Format} with - for _. */
  static final List<String> FORMATS = List.of("json", "pairs", "pattern", "csv", "python-dict",
      "tfrecord");

  static final List<Key> READ = List.of(
      Key.choice("from", "stdout", List.of("stdout", "stderr"),
          "Which output stream of the trainer carries the metrics (ignored when 'file' is set)."),
      Key.text("file", null, "Follow this file instead of an output stream (relative to workdir);"
          + " rotation, truncation, late creation and deletion are survived."),
      Key.choice("format", "json", FORMATS,
          "json: one JSON object a line (nested keys as a.b); pairs: key=value or key: value"
              + " words; pattern: your regular expression with named groups; csv: a header line"
              + " naming the columns, then rows (comma, semicolon or tab, found from the header);"
              + " python-dict: a Python dict literal a line, {'loss': 0.69, 'epoch': 0.01};"
              + " tfrecord: an event file (events.out.tfevents.*) of a summary writer, its scalar"
              + " tags as keys, with 'file' naming the file or the folder holding it."),
      Key.text("pattern", null, "The regular expression for format: pattern, with a named group"
          + " per key, the trainer's key as its name, in Python's or Java's syntax, e.g."
          + " (?P<step>\\d+).*val_loss (?P<val_loss>\\S+)."),
      Key.text("step", "step", "The trainer's key for the step counter."),
      Key.text("epoch", "epoch", "The trainer's key for the epoch."),
      Key.text("rate", "lr", "The trainer's key for the learning rate it is using."),
      Key.map("series", "Series name to the trainer's key; the names 'train' and 'validation'"
          + " have their usual meaning. Default: {train: loss, validation: val_loss}."),
      Key.integer("line_limit", 1 << 20, 16, 64 << 20, "Longest line read, in characters; the"
          + " rest of a longer line is dropped and the line counted as oversized."));

  /**
   * The keys of one entry of {@code read.also}: a further source read at the same time, e.g.
   * {@code also: [ { file: val.csv, format: csv, series: { validation: val_loss } } ]}.
   */
  static final List<Key> READ_ALSO = List.of(
      Key.choice("from", "stdout", List.of("stdout", "stderr"),
          "Which output stream carries this source's metrics (ignored when 'file' is set)."),
      Key.text("file", null, "Follow this file (relative to workdir)."),
      Key.choice("format", "json", FORMATS,
          "How this source's lines are written (as read.format)."),
      Key.text("pattern", null, "The regular expression for format: pattern."),
      Key.text("step", "step", "This source's key for the step; lines without it take the latest"
          + " step of any source."),
      Key.text("epoch", "epoch", "This source's key for the epoch."),
      Key.text("rate", null, "This source's key for the learning rate in use, if it has one."),
      Key.map("series", "Series name to this source's key (required; names must not repeat"
          + " those of other sources)."));

  static final List<Key> STEER = List.of(
      Key.choice("by", "control-file", List.of("control-file", "restart"),
          "control-file: write the new rate to the file in STEPWARDEN_CONTROL; restart: stop the"
              + " trainer and launch the command again with the new values."),
      Key.duration("confirm_within", "2m", "How long the trainer has to report the new rate (or"
          + " applied_revision) before the change is logged as not confirmed."),
      Key.choice("unconfirmed", "log", List.of("log", "restart"),
          "What to do when a change is not confirmed in time: log it, or restart the trainer."));

  static final List<Key> CHECKPOINTS = List.of(
      Key.requiredText("watch", "A glob, relative to workdir, matching the trainer's checkpoint"
          + " files (e.g. ckpt/*.pt)."),
      Key.integer("keep", 5, 1, 1000, "How many healthy checkpoints the vault keeps, besides the"
          + " best one."));

  static final List<Key> LIMITS = List.of(
      Key.integer("rewinds", 5, 0, 10_000, "At most this many rewinds; then the run gives up."),
      Key.integer("crash_restarts", 3, 0, 10_000,
          "At most this many restarts after a crash; then the run gives up."),
      Key.duration("silence", "15m", "No metric for this long counts as a hang; 0 turns it off."),
      Key.duration("first_metric", "1h", "After a launch, no first metric for this long counts as"
          + " a hang (the trainer may load data or compile first); never shorter than silence;"
          + " 0 waits for the first metric without a limit."),
      Key.duration("crash_backoff", "5s", "Wait before the first restart after a crash; doubles"
          + " with each further crash, up to 5 minutes."));

  static final List<Key> RATE_LIMITS = List.of(
      Key.number("min", 1e-6, 0, 1e6, "The floor: lowering further is pointless; a guard that"
          + " would go below it ends the run instead."),
      Key.number("max", 10.0, Double.MIN_NORMAL, 1e6, "The ceiling for raised rates."));

  static final List<Key> GUARD = List.of(
      Key.requiredText("name", "A unique name, printed in the audit log and the report."),
      Key.integer("then_wait", 0, 0, 1_000_000,
          "After firing, this guard rests for this many evaluations of its series."));

  static final List<String> ACTIONS = List.of("scale", "set_rate", "rewind", "stop", "give_up");

  /** Detector name to (default series, parameters, plain description). */
  static final Map<String, DetectorSpec> DETECTORS = detectors();

  record DetectorSpec(String name, String defaultSeries, List<Key> params, String doc) {}

  private static Map<String, DetectorSpec> detectors() {
    Map<String, DetectorSpec> d = new LinkedHashMap<>();
    d.put("breaks", new DetectorSpec("breaks", "train", List.of(),
        "the series reports NaN or an infinity"));
    d.put("rises", new DetectorSpec("rises", "train", List.of(
        Key.factor("above_best", 3.0, 1.0, 1e6, "Fire when the smoothed value exceeds this many"
            + " times the best smoothed value so far (3x or 3)."),
        Key.integer("samples", 3, 1, 100_000, "... for this many samples in a row (each raw"
            + " value above the limit too)."),
        Key.number("smoothing", 0.2, 0, 0.9999, "The factor b of the bias-corrected moving"
            + " average m = b m + (1 - b) x (0: no smoothing).")),
        "the smoothed series rises far above its best"));
    d.put("climbs", new DetectorSpec("climbs", "train", List.of(
        Key.integer("over", 30, 4, 10_000, "Window of samples for the trend test."),
        Key.number("p_below", 1e-4, 0, 1, "Significance level of the upward trend test.")),
        "the series trends significantly upward"));
    d.put("wobbles", new DetectorSpec("wobbles", "train", List.of(
        Key.integer("over", 40, 6, 10_000, "Window of samples."),
        Key.number("autocorr_below", -0.75, -1, 1, "Lag-1 autocorrelation of successive changes"
            + " at or below this value means the changes keep flipping sign (white noise alone"
            + " gives -0.5)."),
        Key.fraction("net_change_below", 0.02, 0, 10, "... while the level moves by less than this"
            + " fraction over the window.")),
        "the series sloshes up and down without net progress"));
    d.put("flattens", new DetectorSpec("flattens", "validation", List.of(
        Key.integer("over", 5, 2, 100_000, "Number of evaluations without enough improvement."),
        Key.fraction("gain_below", 0.005, 0, 1, "The best value must improve by at least this"
            + " fraction within the window (0.5% or 0.005)."),
        Key.number("p_below", 0.2, 0, 1, "No plateau while a downward trend is significant at"
            + " this level.")),
        "the best value has stopped improving"));
    d.put("creeps", new DetectorSpec("creeps", "validation", List.of(
        Key.integer("over", 8, 4, 100_000, "Window of evaluations."),
        Key.number("p_below", 0.001, 0, 1, "Significance level of the downward trend."),
        Key.fraction("pace_below", 0.002, 0, 1, "A trend slower than this fraction of the level"
            + " per evaluation counts as slow.")),
        "the series falls steadily but slowly"));
    d.put("overfits", new DetectorSpec("overfits", "validation", List.of(
        Key.choice("criterion", "GL", List.of("GL", "PQ", "UP"), "Which of Prechelt's"
            + " criteria: GL (generalisation loss), PQ (GL over training progress), UP (rises"
            + " in successive strips)."),
        new Key("above", Key.Kind.NUMBER, null, 0, 1e6, false, null, "Threshold: alpha for GL"
            + " (default 5) and PQ (default 0.75), the number of strips s for UP (default 3)."),
        Key.integer("strip", 5, 1, 10_000, "Strip length k in training samples per evaluation.")),
        "validation worsens while training still improves"));
    d.put("stuck_at_chance", new DetectorSpec("stuck_at_chance", "train", List.of(
        Key.integer("classes", null, 2, 1_000_000, "Number of classes; chance-level loss is"
            + " ln(classes)."),
        Key.fraction("tolerance", 0.05, 0, 1, "Within this fraction of ln(classes) counts as"
            + " chance level."),
        Key.integer("by_step", 500, 1, Integer.MAX_VALUE, "Judge at this step.")),
        "the loss sits at chance level early on"));
    return d;
  }
}
