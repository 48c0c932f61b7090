package dev.stepwarden.rules;

import dev.stepwarden.detectors.DetectorKind;
import dev.stepwarden.detectors.Param;
import dev.stepwarden.rules.GuardFile.Action;
import dev.stepwarden.rules.GuardFile.Condition;
import dev.stepwarden.rules.GuardFile.Guard;
import java.util.ArrayList;
import java.util.List;
import java.util.Locale;

/** Says in plain words what a loaded guard file will do: the text of {@code stepwarden check}. */
public final class Explain {
  private Explain() {}

  public static List<String> describe(GuardFile f) {
    List<String> out = new ArrayList<>();
    GuardFile.Run r = f.run();
    out.add("Run '" + r.name() + "': " + (r.command().isEmpty()
        ? "the command comes after '--' on the command line"
        : "runs " + String.join(" ", r.command())) + ", starting at learning rate "
        + num(r.learningRate()) + ".");
    out.add("Reads " + switch (f.read().source()) {
      case STDOUT -> "the trainer's standard output";
      case STDERR -> "the trainer's standard error";
      case FILE -> "the file " + f.read().file();
    } + " as " + f.read().format().name().toLowerCase(Locale.ROOT) + "; series "
        + f.read().series() + ", step key '" + f.read().stepKey() + "'.");
    for (dev.stepwarden.metrics.ReadPlan also : f.read().also()) {
      out.add("Also reads " + (also.source() == dev.stepwarden.metrics.ReadPlan.Source.FILE
          ? "the file " + also.file() : "the trainer's " + also.source().name()
              .toLowerCase(Locale.ROOT)) + " as " + also.format().name().toLowerCase(Locale.ROOT)
          + "; series " + also.series() + ".");
    }
    out.add(f.steer().by() == GuardFile.Steer.Method.RESTART
        ? "A new rate is applied by stopping the trainer and starting it again with it."
        : "A new rate is written to the control file; the trainer has "
            + f.steer().confirmWithin().toSeconds() + " s to confirm it"
            + (f.steer().restartWhenUnconfirmed() ? ", else it is restarted with it." : "."));
    f.probe().ifPresent(p -> out.add("Before the run, a rate probe raises the rate from "
        + num(p.from()) + " to " + num(p.to()) + " in " + p.steps() + " steps (" + p.hold()
        + " samples each), reads the usable range off the loss (where it starts to fall to where"
        + " it turns ragged or rises), starts at " + num(p.pick()) + "x its upper end, and"
        + " starts the trainer again from scratch with that rate (range test, Smith 2017,"
        + " s3.3)." + (p.branch() > 0 ? " Then it checks the pick: three launches from scratch"
        + " at the pick x 1/2, 1 and 2, " + p.branch() + " training samples each, and the run"
        + " starts at the rate of the branch whose loss is lowest by more than noise (successive"
        + " halving, Li et al. 2017)." : "")));
    f.checkpoints().ifPresent(c -> out.add("Checkpoints: files matching " + c.watch()
        + "; the vault keeps the best and the last " + c.keep() + " healthy ones."));
    if (f.guards().isEmpty()) {
      out.add("No guards: only the built-in safety net (a non-finite training loss gives up).");
    }
    int i = 1;
    for (Guard g : f.guards()) {
      out.add(i++ + ". '" + g.name() + "': when " + condition(g.when()) + ", " + actions(g)
          + (g.thenWait() > 0 ? "; then rests for " + g.thenWait() + " evaluations" : "") + ".");
    }
    GuardFile.Limits l = f.limits();
    out.add("Limits: rate between " + num(l.minRate()) + " and " + num(l.maxRate())
        + " (a guard that would go below the floor ends the run); at most " + l.rewinds()
        + " rewinds and " + l.crashRestarts() + " crash restarts; "
        + (l.silence().isZero() ? "no silence watchdog." : silence(l)));
    return out;
  }

  private static String silence(GuardFile.Limits l) {
    String s = "no metric for " + l.silence().toMinutes() + " min counts as a hang";
    return s + (l.startupSilence().isZero() ? " (no limit before a launch's first metric)."
        : ", as does no first metric " + l.startupSilence().toMinutes() + " min after a launch.");
  }

  static String condition(Condition c) {
    return DetectorKind.named(c.detector()).orElseThrow().explain(c.series(), c.params());
  }

  static String actions(Guard g) {
    List<String> parts = new ArrayList<>();
    for (Action a : g.actions()) {
      if (a instanceof Action.Scale sc) {
        parts.add(sc.factor() < 1 ? "lowers the rate x" + num(sc.factor())
            : "raises the rate x" + num(sc.factor()) + " (undone if the next window is worse)");
      } else if (a instanceof Action.SetRate sr) {
        parts.add("sets the rate to " + num(sr.rate()));
      } else if (a instanceof Action.Rewind rw) {
        parts.add("rewinds to the newest healthy checkpoint from before the trouble"
            + (rw.skipBatches() > 0 ? " and skips " + rw.skipBatches() + " batches" : ""));
      } else if (a instanceof Action.Stop) {
        parts.add("stops the run early as a success (exit 3) and names the best checkpoint");
      } else {
        parts.add("gives up (exit 4)");
      }
    }
    return "it " + String.join(" and ", parts);
  }

  private static String num(double v) {
    return Param.num(v);
  }

  private static String pct(double fraction) {
    return num(fraction * 100) + " %";
  }
}
