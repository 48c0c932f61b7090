package dev.stepwarden.rules;

import dev.stepwarden.stats.Prechelt;
import dev.stepwarden.detectors.DetectorKind;
import dev.stepwarden.detectors.Param;
import java.util.ArrayList;
import java.util.List;

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
          + " rose)."),
      Key.integer("branch", 0, 0, 1_000_000, "Then check the pick: from scratch, run this many"
          + " training samples at the pick x 1/2, 1 and 2 each and start at the best branch's"
          + " rate (successive halving with a noise-aware comparison; 0: no check)."));

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

  /** The parameter keys of a detector, read from its one description, plus its series. */
  static List<Key> detectorKeys(DetectorKind d) {
    List<Key> keys = new ArrayList<>();
    for (Param p : d.params()) {
      keys.add(Key.of(p));
    }
    keys.add(Key.text("series", d.defaultSeries(), "The series this detector watches."));
    return keys;
  }
}
