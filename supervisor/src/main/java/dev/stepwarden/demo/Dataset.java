package dev.stepwarden.demo;

import java.util.List;

/**
 * A labelled table held row-major in one array: row {@code r} is {@code x[r * features ..]}.
 * Mutable only through {@link #standardise}, which the split applies once.
 */
final class Dataset {
  final int rows;
  final int features;
  final double[] x;
  final int[] y;
  final List<String> featureNames;
  final List<String> classNames;

  Dataset(double[] x, int[] y, List<String> featureNames, List<String> classNames) {
    this.features = featureNames.size();
    this.rows = y.length;
    if (x.length != rows * features) {
      throw new IllegalArgumentException("x holds " + x.length + " values, expected " + rows * features);
    }
    this.x = x;
    this.y = y;
    this.featureNames = List.copyOf(featureNames);
    this.classNames = List.copyOf(classNames);
  }

  int classes() {
    return classNames.size();
  }

  Dataset rows(int[] indices, int from, int to) {
    double[] sx = new double[(to - from) * features];
    int[] sy = new int[to - from];
    for (int i = from; i < to; i++) {
      System.arraycopy(x, indices[i] * features, sx, (i - from) * features, features);
      sy[i - from] = y[indices[i]];
    }
    return new Dataset(sx, sy, featureNames, classNames);
  }

  int[] classCounts() {
    int[] counts = new int[classes()];
    for (int label : y) {
      counts[label]++;
    }
    return counts;
  }

  /** Per-feature mean and standard deviation (population form) of this table. */
  double[][] moments() {
    double[] mean = new double[features];
    double[] sd = new double[features];
    for (int r = 0; r < rows; r++) {
      for (int f = 0; f < features; f++) {
        mean[f] += x[r * features + f];
      }
    }
    for (int f = 0; f < features; f++) {
      mean[f] /= rows;
    }
    for (int r = 0; r < rows; r++) {
      for (int f = 0; f < features; f++) {
        double d = x[r * features + f] - mean[f];
        sd[f] += d * d;
      }
    }
    for (int f = 0; f < features; f++) {
      sd[f] = Math.sqrt(sd[f] / rows);
    }
    return new double[][] {mean, sd};
  }

  /** Maps each feature to {@code (v - mean) / sd}; a constant column (sd 0) is only centred. */
  void standardise(double[] mean, double[] sd) {
    for (int r = 0; r < rows; r++) {
      for (int f = 0; f < features; f++) {
        double scale = sd[f] > 0 ? sd[f] : 1.0;
        x[r * features + f] = (x[r * features + f] - mean[f]) / scale;
      }
    }
  }

  /** A train/validation pair, both standardised with the training rows' statistics. */
  record Split(Dataset train, Dataset validation) {}

  /**
   * Shuffles the rows with {@code seed}, keeps {@code validationFraction} of them for validation and
   * standardises both parts with the training part's mean and deviation, so no validation
   * information leaks into training (common practice).
   */
  Split split(double validationFraction, long seed) {
    int[] order = new int[rows];
    for (int i = 0; i < rows; i++) {
      order[i] = i;
    }
    new SplitMix64(SplitMix64.derive(seed, 0x5b17)).shuffle(order);
    int validationRows = Math.max(1, (int) Math.round(rows * validationFraction));
    int trainRows = rows - validationRows;
    if (trainRows < 1) {
      throw new IllegalArgumentException("need at least 2 rows to split, got " + rows);
    }
    Dataset train = rows(order, 0, trainRows);
    Dataset validation = rows(order, trainRows, rows);
    double[][] m = train.moments();
    train.standardise(m[0], m[1]);
    validation.standardise(m[0], m[1]);
    return new Split(train, validation);
  }
}
