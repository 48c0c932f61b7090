package dev.stepwarden.demo;

/**
 * The mutable state of one training run and the SGD update. Which rows a step sees is a pure
 * function of the seed and the batch cursor: epoch {@code e} visits the training rows in a
 * permutation drawn from a stream seeded by {@code (seed, e)}, batch {@code c mod stepsPerEpoch}
 * of it. So a checkpoint needs no generator state, only the cursor, and skipping batches is
 * moving the cursor without moving the step counter.
 */
final class Training {
  final Network network;
  final Dataset train;
  final Dataset validation;
  final long seed;
  final int batch;
  final int stepsPerEpoch;
  final double[] params;
  final double[] velocity;
  private final double[] gradient;
  private int[] order;
  private long orderEpoch = -1;

  /** Updates applied so far; the step axis the trainer reports. */
  long step;
  /** Batches consumed so far, counting skipped ones; decides epoch and batch. */
  long cursor;
  double learningRate;
  double momentum;
  /** The newest control-file revision this state has taken in (0: none). */
  long controlRevision;

  Training(
      Network network,
      Dataset.Split data,
      long seed,
      int batch,
      double[] params,
      double[] velocity,
      double learningRate,
      double momentum) {
    if (params.length != network.parameterCount() || velocity.length != params.length) {
      throw new IllegalArgumentException("parameter arrays do not fit the network");
    }
    this.network = network;
    this.train = data.train();
    this.validation = data.validation();
    this.seed = seed;
    this.batch = batch;
    this.stepsPerEpoch = (train.rows + batch - 1) / batch; // a short last batch keeps every row
    this.params = params;
    this.velocity = velocity;
    this.gradient = new double[params.length];
    this.learningRate = learningRate;
    this.momentum = momentum;
  }

  static Training fresh(
      Network network, Dataset.Split data, long seed, int batch, double lr, double momentum) {
    double[] p = network.initialParameters(seed);
    return new Training(network, data, seed, batch, p, new double[p.length], lr, momentum);
  }

  /** 1-based epoch of the batch at {@code cursor}. */
  long epochAt(long batchCursor) {
    return batchCursor / stepsPerEpoch + 1;
  }

  boolean finished(int epochs) {
    return cursor >= (long) epochs * stepsPerEpoch;
  }

  boolean atEpochEnd() {
    return cursor % stepsPerEpoch == 0;
  }

  /** One SGD step on the batch at the cursor; returns that batch's mean loss before the update. */
  double step() {
    long epochIndex = cursor / stepsPerEpoch;
    int within = (int) (cursor % stepsPerEpoch);
    int[] rows = orderFor(epochIndex);
    int from = within * batch;
    int count = Math.min(batch, train.rows - from);
    double loss = network.loss(params, train, rows, from, count, gradient);
    double lr = learningRate;
    if (momentum > 0.0) {
      // the classical heavy-ball form v <- mu v - lr g; p <- p + v
      // (Sutskever et al. 2013, "On the importance of initialization and momentum", eq. 1-2)
      for (int i = 0; i < params.length; i++) {
        velocity[i] = momentum * velocity[i] - lr * gradient[i];
        params[i] += velocity[i];
      }
    } else {
      for (int i = 0; i < params.length; i++) {
        params[i] -= lr * gradient[i];
      }
    }
    step++;
    cursor++;
    return loss;
  }

  /** {@code [loss, accuracy]} on the validation rows. */
  double[] evaluate() {
    return network.evaluate(params, validation);
  }

  private int[] orderFor(long epochIndex) {
    if (epochIndex != orderEpoch) {
      order = new int[train.rows];
      for (int i = 0; i < order.length; i++) {
        order[i] = i;
      }
      new SplitMix64(SplitMix64.derive(seed, 0xe90c0000L + epochIndex)).shuffle(order);
      orderEpoch = epochIndex;
    }
    return order;
  }
}
