package dev.stepwarden.demo;

import java.util.Arrays;

/**
 * A fully connected network with tanh hidden layers and a softmax output, its parameters held
 * outside in one flat array so that SGD, momentum, checkpoints and the gradient check all treat
 * them alike. Layout per layer {@code l}: the weight matrix {@code W_l} (rows = outputs, row-major),
 * then the bias vector {@code b_l}.
 *
 * <p>tanh rather than ReLU: it is smooth, so central finite differences check the backward pass
 * without kinks, and with a rate far too large its units saturate and training stalls at a high
 * loss, the way real runs misbehave, instead of units silently dying. Weights start from the
 * Glorot-Bengio uniform range {@code +-sqrt(6 / (fan_in + fan_out))} (Glorot and Bengio 2010,
 * "Understanding the difficulty of training deep feedforward neural networks", eq. 16), biases at
 * zero. Work buffers live in the instance: not thread-safe.
 */
final class Network {
  private final int[] sizes;
  private final int[] weightOffset;
  private final int[] biasOffset;
  private final int parameterCount;
  private final double[][] act; // act[0] = input, act[L] = logits, for the current row
  private final double[][] delta; // dLoss/d(pre-activation) per layer, for the current row
  private final double[] probabilities;

  Network(int... sizes) {
    if (sizes.length < 2) {
      throw new IllegalArgumentException("a network needs an input and an output size");
    }
    for (int s : sizes) {
      if (s < 1) {
        throw new IllegalArgumentException("layer sizes must be positive: " + Arrays.toString(sizes));
      }
    }
    this.sizes = sizes.clone();
    int layers = sizes.length - 1;
    weightOffset = new int[layers];
    biasOffset = new int[layers];
    int offset = 0;
    for (int l = 0; l < layers; l++) {
      weightOffset[l] = offset;
      offset += sizes[l + 1] * sizes[l];
      biasOffset[l] = offset;
      offset += sizes[l + 1];
    }
    parameterCount = offset;
    act = new double[sizes.length][];
    delta = new double[sizes.length][];
    for (int l = 0; l < sizes.length; l++) {
      act[l] = new double[sizes[l]];
      delta[l] = new double[sizes[l]];
    }
    probabilities = new double[sizes[layers]];
  }

  /** {@code inputs -> hiddenLayers x hidden -> classes}; {@code hiddenLayers = 0} is softmax regression. */
  static Network of(int inputs, int hidden, int hiddenLayers, int classes) {
    int[] s = new int[hiddenLayers + 2];
    s[0] = inputs;
    for (int l = 1; l <= hiddenLayers; l++) {
      s[l] = hidden;
    }
    s[hiddenLayers + 1] = classes;
    return new Network(s);
  }

  int[] sizes() {
    return sizes.clone();
  }

  int parameterCount() {
    return parameterCount;
  }

  int inputs() {
    return sizes[0];
  }

  int classes() {
    return sizes[sizes.length - 1];
  }

  double[] initialParameters(long seed) {
    SplitMix64 rng = new SplitMix64(SplitMix64.derive(seed, 0x1417));
    double[] p = new double[parameterCount];
    for (int l = 0; l < sizes.length - 1; l++) {
      double limit = Math.sqrt(6.0 / (sizes[l] + sizes[l + 1]));
      int n = sizes[l + 1] * sizes[l];
      for (int i = 0; i < n; i++) {
        p[weightOffset[l] + i] = rng.uniform(-limit, limit);
      }
    }
    return p;
  }

  /**
   * Mean cross-entropy over the rows {@code rows[from..from+count)} of {@code data}, and when
   * {@code gradient} is not null, its gradient with respect to {@code params} by backpropagation
   * (overwriting {@code gradient}).
   */
  double loss(double[] params, Dataset data, int[] rows, int from, int count, double[] gradient) {
    if (gradient != null) {
      Arrays.fill(gradient, 0.0);
    }
    int last = sizes.length - 1;
    int classes = sizes[last];
    double total = 0.0;
    for (int i = from; i < from + count; i++) {
      int r = rows == null ? i : rows[i];
      forward(params, data.x, r * data.features);
      int label = data.y[r];
      double lse = Softmax.probabilities(act[last], 0, classes, probabilities);
      total += lse - act[last][label];
      if (gradient != null) {
        for (int k = 0; k < classes; k++) {
          delta[last][k] = (probabilities[k] - (k == label ? 1.0 : 0.0)) / count;
        }
        backward(params, gradient);
      }
    }
    return total / count;
  }

  /** Loss and accuracy over every row of {@code data}, forward only. */
  double[] evaluate(double[] params, Dataset data) {
    int last = sizes.length - 1;
    int classes = sizes[last];
    double total = 0.0;
    int correct = 0;
    for (int r = 0; r < data.rows; r++) {
      forward(params, data.x, r * data.features);
      double[] z = act[last];
      total += Softmax.crossEntropy(z, 0, classes, data.y[r]);
      int best = 0;
      for (int k = 1; k < classes; k++) {
        if (z[k] > z[best]) {
          best = k;
        }
      }
      if (best == data.y[r]) {
        correct++;
      }
    }
    return new double[] {total / data.rows, (double) correct / data.rows};
  }

  private void forward(double[] p, double[] x, int offset) {
    System.arraycopy(x, offset, act[0], 0, sizes[0]);
    int last = sizes.length - 1;
    for (int l = 0; l < last; l++) {
      double[] in = act[l];
      double[] out = act[l + 1];
      int nIn = sizes[l];
      int w = weightOffset[l];
      int b = biasOffset[l];
      for (int j = 0; j < sizes[l + 1]; j++) {
        double z = p[b + j];
        int row = w + j * nIn;
        for (int i = 0; i < nIn; i++) {
          z += p[row + i] * in[i];
        }
        out[j] = l + 1 < last ? Math.tanh(z) : z;
      }
    }
  }

  /** Accumulates this row's gradient, starting from {@code delta[last]} (set by the caller). */
  private void backward(double[] p, double[] g) {
    for (int l = sizes.length - 2; l >= 0; l--) {
      double[] in = act[l];
      double[] d = delta[l + 1];
      int nIn = sizes[l];
      int w = weightOffset[l];
      int b = biasOffset[l];
      for (int j = 0; j < sizes[l + 1]; j++) {
        double dj = d[j];
        int row = w + j * nIn;
        for (int i = 0; i < nIn; i++) {
          g[row + i] += dj * in[i];
        }
        g[b + j] += dj;
      }
      if (l > 0) {
        double[] below = delta[l];
        for (int i = 0; i < nIn; i++) {
          double s = 0.0;
          for (int j = 0; j < sizes[l + 1]; j++) {
            s += p[w + j * nIn + i] * d[j];
          }
          below[i] = s * (1.0 - in[i] * in[i]); // tanh'(z) = 1 - tanh(z)^2
        }
      }
    }
  }
}
