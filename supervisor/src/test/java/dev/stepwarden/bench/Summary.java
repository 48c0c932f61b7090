package dev.stepwarden.bench;

import dev.stepwarden.bench.ControlQuality.Mode;
import dev.stepwarden.bench.ControlQuality.Outcome;
import dev.stepwarden.bench.ControlQuality.Task;
import java.util.ArrayList;
import java.util.Arrays;
import java.util.List;
import java.util.Locale;

/**
 * One task's nights scored against each seed's grid best, with the goals: every night
 * within 1.10x, median within 1.03x, a start at the seed's best fixed rate within 1.02x, compute
 * at most 1.5 plain runs, no night ending diverged.
 */
record Summary(Task task, int seeds, List<Outcome> all, double[] gridBest, double[] gridRate) {
  static final double EVERY = 1.10;
  static final double MEDIAN = 1.03;
  static final double AT_BEST = 1.02;
  static final double COMPUTE = 1.5;

  static Summary of(Task task, int seeds, List<Outcome> all) {
    double[] best = new double[seeds + 1];
    double[] rate = new double[seeds + 1];
    Arrays.fill(best, Double.POSITIVE_INFINITY);
    for (Outcome o : all) {
      if (o.run().mode() == Mode.FIXED && o.test() < best[o.run().seed()]) {
        best[o.run().seed()] = o.test();
        rate[o.run().seed()] = o.run().rate();
      }
    }
    return new Summary(task, seeds, all, best, rate);
  }

  Outcome get(Mode m, int seed, double rate) {
    return all.stream().filter(o -> o.run().mode() == m && o.run().seed() == seed
        && o.run().rate() == rate).findFirst().orElseThrow();
  }

  /** Test loss over the seed's grid best; a night that named no checkpoint scores infinity. */
  double ratio(Outcome o) {
    return Double.isFinite(o.test()) ? o.test() / gridBest[o.run().seed()]
        : Double.POSITIVE_INFINITY;
  }

  List<Double> ratios(Mode m) {
    return all.stream().filter(o -> o.run().mode() == m).map(this::ratio).sorted().toList();
  }

  static double median(List<Double> sorted) {
    int n = sorted.size();
    return n % 2 == 1 ? sorted.get(n / 2) : (sorted.get(n / 2 - 1) + sorted.get(n / 2)) / 2;
  }

  long misses(Mode m) {
    return ratios(m).stream().filter(r -> r > EVERY).count();
  }

  double worst(Mode m) {
    List<Double> r = ratios(m);
    return r.get(r.size() - 1);
  }

  /** The worst supervised night among those started at the seed's best fixed rate. */
  double atBest() {
    double w = 0;
    for (int s = 1; s <= seeds; s++) {
      w = Math.max(w, ratio(get(Mode.SUPERVISED, s, gridRate[s])));
    }
    return w;
  }

  double[] compute() {
    return all.stream().filter(o -> o.run().mode() == Mode.SUPERVISED)
        .mapToDouble(Outcome::cost).toArray();
  }

  long diverged() {
    return all.stream().filter(o -> o.run().mode() == Mode.SUPERVISED && o.diverged()).count();
  }

  String table() {
    StringBuilder b = new StringBuilder();
    b.append(String.format(Locale.ROOT, "%n#### %s: %s, %d epochs%n%n", task.name(),
        task.source(), task.epochs()));
    b.append("Grid best (test loss of the best-validation checkpoint, best fixed rate) per seed:");
    for (int s = 1; s <= seeds; s++) {
      b.append(String.format(Locale.ROOT, " seed %d: %.4f at %s%s", s, gridBest[s],
          fmt(gridRate[s]), s < seeds ? ";" : ".\n\n"));
    }
    b.append("| start | supervised (x grid best) | compute (plain runs) | in-process plateau"
        + " scheduler | fixed rate alone | interventions / rewinds | probe picked |\n");
    b.append("|---:|---|---|---|---|---|---|\n");
    for (double r : ControlQuality.RATES) {
      List<String> sup = new ArrayList<>();
      List<String> cost = new ArrayList<>();
      List<String> plat = new ArrayList<>();
      List<String> fixed = new ArrayList<>();
      List<String> acts = new ArrayList<>();
      List<String> picks = new ArrayList<>();
      for (int s = 1; s <= seeds; s++) {
        Outcome o = get(Mode.SUPERVISED, s, r);
        sup.add(x(ratio(o)) + (o.diverged() ? " **diverged**" : ""));
        cost.add(String.format(Locale.ROOT, "%.2f", o.cost()));
        plat.add(x(ratio(get(Mode.PLATEAU, s, r))));
        fixed.add(x(ratio(get(Mode.FIXED, s, r))));
        acts.add(o.interventions() + "/" + o.rewinds());
        picks.add(o.probePick() == null ? "-" : fmt(o.probePick()));
      }
      b.append("| ").append(fmt(r)).append(" | ").append(String.join(" / ", sup)).append(" | ")
          .append(String.join(" / ", cost)).append(" | ").append(String.join(" / ", plat))
          .append(" | ").append(String.join(" / ", fixed)).append(" | ")
          .append(String.join(" ", acts)).append(" | ").append(String.join(" / ", picks))
          .append(" |\n");
    }
    double[] c = compute();
    double meanCost = Arrays.stream(c).average().orElse(Double.NaN);
    double maxCost = Arrays.stream(c).max().orElse(Double.NaN);
    b.append(String.format(Locale.ROOT, "%nGoals (supervised, %d nights): every night <= %.2fx:"
        + " %s (%d miss, worst %s); median <= %.2fx: %s (%s); started at the seed's best fixed"
        + " rate <= %.2fx: %s (worst %s); compute <= %.1f plain runs: %s (mean %.2f, max %.2f);"
        + " none diverged: %s (%d).%n", c.length, EVERY, misses(Mode.SUPERVISED) == 0 ? "met"
        : "missed", misses(Mode.SUPERVISED), x(worst(Mode.SUPERVISED)), MEDIAN,
        median(ratios(Mode.SUPERVISED)) <= MEDIAN ? "met" : "missed",
        x(median(ratios(Mode.SUPERVISED))), AT_BEST, atBest() <= AT_BEST ? "met" : "missed",
        x(atBest()), COMPUTE, maxCost <= COMPUTE ? "met" : "missed", meanCost, maxCost,
        diverged() == 0 ? "met" : "missed", diverged()));
    b.append(String.format(Locale.ROOT, "In-process plateau scheduler (1 plain run each): worst"
        + " %s, median %s, %d of %d miss %.2fx. The grid itself costs %d plain runs.%n",
        x(worst(Mode.PLATEAU)), x(median(ratios(Mode.PLATEAU))), misses(Mode.PLATEAU),
        ratios(Mode.PLATEAU).size(), EVERY, ControlQuality.GRID.length));
    return b.toString();
  }

  static String overview(List<Summary> sums) {
    StringBuilder b = new StringBuilder();
    b.append("\n#### All tasks (score: held-out test loss / the seed's grid best)\n\n");
    b.append("| task | supervised: worst / median | nights over 1.10x | at the best fixed rate"
        + " (worst) | compute: mean / max plain runs | diverged | plateau scheduler: worst /"
        + " median, over 1.10x | grid |\n");
    b.append("|---|---|---|---|---|---|---|---|\n");
    for (Summary s : sums) {
      double[] c = s.compute();
      b.append(String.format(Locale.ROOT, "| %s | %s / %s | %d of %d | %s | %.2f / %.2f | %d |"
          + " %s / %s, %d of %d | %d runs |%n", s.task().name(), x(s.worst(Mode.SUPERVISED)),
          x(median(s.ratios(Mode.SUPERVISED))), s.misses(Mode.SUPERVISED), c.length,
          x(s.atBest()), Arrays.stream(c).average().orElse(Double.NaN),
          Arrays.stream(c).max().orElse(Double.NaN), s.diverged(), x(s.worst(Mode.PLATEAU)),
          x(median(s.ratios(Mode.PLATEAU))), s.misses(Mode.PLATEAU),
          s.ratios(Mode.PLATEAU).size(), ControlQuality.GRID.length));
    }
    return b.toString();
  }

  static String x(double ratio) {
    if (!Double.isFinite(ratio)) {
      return "none";
    }
    return ratio < 100 ? String.format(Locale.ROOT, "%.2fx", ratio) : ">100x";
  }

  static String fmt(double r) {
    return String.format(Locale.ROOT, "%.3g", r);
  }
}
