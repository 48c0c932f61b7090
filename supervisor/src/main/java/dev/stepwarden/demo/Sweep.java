package dev.stepwarden.demo;

import java.io.PrintStream;
import java.util.ArrayList;
import java.util.List;
import java.util.Locale;

/**
 * The learning-rate sweep behind {@code --sweep}: the same data, seed and epochs for each rate,
 * validation once per epoch, no checkpoints and no per-step output. It tells the people who tune
 * the demo night which starting rate is sensible and how a too-large one looks.
 */
final class Sweep {
  private Sweep() {}

  /** One rate's outcome. Train figures are over the steps of the last epoch. */
  record Row(
      double learningRate,
      double bestValidationLoss,
      int bestEpoch,
      double finalValidationLoss,
      double finalValidationAccuracy,
      double lastEpochTrainMean,
      double lastEpochTrainSd) {}

  static List<Row> run(TrainerOptions o, Dataset.Split split, double[] rates) {
    List<Row> rows = new ArrayList<>();
    Dataset train = split.train();
    for (double rate : rates) {
      Network network = Network.of(train.features, o.hidden, o.layers, train.classes());
      Training t = Training.fresh(network, split, o.seed, o.batch, rate, o.momentum);
      double best = Double.POSITIVE_INFINITY;
      int bestEpoch = 0;
      double[] v = {Double.NaN, Double.NaN};
      double sum = 0;
      double sumSq = 0;
      int n = 0;
      for (int epoch = 1; epoch <= o.epochs; epoch++) {
        sum = 0;
        sumSq = 0;
        n = 0;
        for (int s = 0; s < t.stepsPerEpoch; s++) {
          double loss = t.step();
          sum += loss;
          sumSq += loss * loss;
          n++;
        }
        v = t.evaluate();
        if (v[0] < best) { // NaN never wins
          best = v[0];
          bestEpoch = epoch;
        }
      }
      double mean = sum / n;
      double sd = Math.sqrt(Math.max(0.0, sumSq / n - mean * mean));
      rows.add(new Row(rate, best, bestEpoch, v[0], v[1], mean, sd));
    }
    return rows;
  }

  static void print(TrainerOptions o, Dataset.Split split, PrintStream out) {
    long started = System.nanoTime();
    List<Row> rows = run(o, split, o.sweepRates);
    double seconds = (System.nanoTime() - started) / 1e9;
    out.println(String.format(Locale.ROOT,
        "# sweep: %d epochs, batch %d, seed %d, %d layer(s) of %d, momentum %s, %d train rows",
        o.epochs, o.batch, o.seed, o.layers, o.hidden, o.momentum, split.train().rows));
    out.println(String.format(Locale.ROOT, "%-8s %-13s %-10s %-14s %-13s %-16s %-14s",
        "lr", "best_val_loss", "best_epoch", "final_val_loss", "final_val_acc",
        "train_last_mean", "train_last_sd"));
    for (Row r : rows) {
      out.println(String.format(Locale.ROOT, "%-8s %-13s %-10d %-14s %-13s %-16s %-14s",
          r.learningRate(), fmt(r.bestValidationLoss()), r.bestEpoch(),
          fmt(r.finalValidationLoss()), fmt(r.finalValidationAccuracy()),
          fmt(r.lastEpochTrainMean()), fmt(r.lastEpochTrainSd())));
    }
    out.println(String.format(Locale.ROOT, "# %.2f s for %d rates", seconds, rows.size()));
    out.flush();
  }

  private static String fmt(double v) {
    return Double.isFinite(v) ? String.format(Locale.ROOT, "%.4f", v)
        : Double.isNaN(v) ? "nan" : v > 0 ? "inf" : "-inf";
  }
}
