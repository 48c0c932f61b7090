package dev.stepwarden.demo;

import static org.assertj.core.api.Assertions.assertThat;
import static org.assertj.core.api.Assertions.within;

import java.util.List;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.params.ParameterizedTest;
import org.junit.jupiter.params.provider.ValueSource;

class NetworkMathTest {

  /**
   * The standard check of a backward pass: every partial derivative against the central difference
   * {@code (L(w + h) - L(w - h)) / 2h}, whose error is O(h^2) (Bishop 2006, Pattern Recognition and
   * Machine Learning, s5.3.3 "Numerical differentiation"; Goodfellow, Bengio and Courville 2016,
   * Deep Learning, s11.5 "Debugging strategies"). In double precision a correct gradient agrees to
   * a relative error far below 1e-6.
   */
  @ParameterizedTest(name = "{0} hidden layer(s)")
  @ValueSource(ints = {0, 1, 2})
  void backpropagationMatchesCentralFiniteDifferences(int hiddenLayers) {
    Network net = Network.of(5, 4, hiddenLayers, 3);
    Dataset data = randomData(7, 5, 3, 11);
    double[] p = net.initialParameters(3);
    SplitMix64 rng = new SplitMix64(99);
    for (int i = 0; i < p.length; i++) {
      p[i] = 1.5 * p[i] + 0.3 * rng.nextGaussian(); // non-zero biases, some tanh curvature
    }
    double[] analytic = new double[p.length];
    net.loss(p, data, null, 0, data.rows, analytic);

    double h = 1e-5;
    double worst = 0;
    double diffSq = 0;
    double sumSq = 0;
    for (int i = 0; i < p.length; i++) {
      double saved = p[i];
      p[i] = saved + h;
      double up = net.loss(p, data, null, 0, data.rows, null);
      p[i] = saved - h;
      double down = net.loss(p, data, null, 0, data.rows, null);
      p[i] = saved;
      double numeric = (up - down) / (2 * h);
      double scale = Math.max(Math.abs(numeric) + Math.abs(analytic[i]), 1e-4);
      worst = Math.max(worst, Math.abs(numeric - analytic[i]) / scale);
      diffSq += (numeric - analytic[i]) * (numeric - analytic[i]);
      sumSq += (numeric + analytic[i]) * (numeric + analytic[i]) / 4;
    }
    System.out.printf("gradient check, %d hidden: worst relative error %.3g%n", hiddenLayers, worst);
    assertThat(worst).isLessThan(1e-6);
    assertThat(Math.sqrt(diffSq / sumSq)).isLessThan(1e-6);
  }

  @Test
  void crossEntropyOfAUniformPredictionIsLnC() {
    // -log(1/C) = ln C: equal logits mean a uniform softmax (a mathematical identity)
    for (int classes : new int[] {2, 3, 10, 1000}) {
      for (double level : new double[] {0.0, 1000.0, -1000.0}) {
        double[] z = new double[classes];
        java.util.Arrays.fill(z, level);
        assertThat(Softmax.crossEntropy(z, 0, classes, classes - 1))
            .as("C=%d, logits %s", classes, level)
            .isCloseTo(Math.log(classes), within(1e-12));
      }
    }
  }

  @Test
  void logSumExpOfLogitsNear1000StaysFiniteAndExact() {
    double[] z = {1000, 999, 998};
    // exp(1000) overflows a double (largest finite ~1.8e308 = e^709.78, IEEE 754 binary64)
    double naive = Math.log(Math.exp(z[0]) + Math.exp(z[1]) + Math.exp(z[2]));
    assertThat(naive).isInfinite();

    double tail = Math.log(1 + Math.exp(-1) + Math.exp(-2)); // shifted by the max, exact
    assertThat(Softmax.logSumExp(z, 0, 3)).isCloseTo(1000 + tail, within(1e-9));
    assertThat(Softmax.crossEntropy(z, 0, 3, 0)).isFinite().isCloseTo(tail, within(1e-12));
    assertThat(Softmax.crossEntropy(z, 0, 3, 2)).isCloseTo(2 + tail, within(1e-12));
    assertThat(Softmax.crossEntropy(new double[] {1000, -1000}, 0, 2, 1))
        .isCloseTo(2000, within(1e-9));
    assertThat(Softmax.logSumExp(new double[] {-1000, -1000}, 0, 2))
        .isCloseTo(-1000 + Math.log(2), within(1e-9));
  }

  @Test
  void softmaxProbabilitiesSumToOneEvenForHugeLogits() {
    double[] p = new double[4];
    Softmax.probabilities(new double[] {1000, 1000, 0, -1000}, 0, 4, p);
    assertThat(p[0] + p[1] + p[2] + p[3]).isCloseTo(1.0, within(1e-12)); // ulp(1000) ~ 1e-13
    assertThat(p[0]).isCloseTo(0.5, within(1e-12));
  }

  @Test
  void nanLogitMakesTheLossNanRatherThanAFiniteLie() {
    assertThat(Softmax.crossEntropy(new double[] {Double.NaN, 1}, 0, 2, 1)).isNaN();
    assertThat(Softmax.logSumExp(new double[] {Double.POSITIVE_INFINITY, 1}, 0, 2)).isInfinite();
  }

  @Test
  void glorotInitialWeightsStayInsideTheirRangeAndBiasesStartAtZero() {
    // Glorot and Bengio 2010, eq. 16: W ~ U[-sqrt(6/(n_in+n_out)), +sqrt(6/(n_in+n_out))]
    Network net = new Network(8, 24, 3);
    double[] p = net.initialParameters(5);
    double limit1 = Math.sqrt(6.0 / 32);
    double limit2 = Math.sqrt(6.0 / 27);
    double max1 = 0;
    for (int i = 0; i < 8 * 24; i++) {
      max1 = Math.max(max1, Math.abs(p[i]));
    }
    assertThat(max1).isLessThanOrEqualTo(limit1).isGreaterThan(0.9 * limit1);
    for (int i = 8 * 24; i < 8 * 24 + 24; i++) {
      assertThat(p[i]).isZero();
    }
    for (int i = 8 * 24 + 24; i < 8 * 24 + 24 + 72; i++) {
      assertThat(Math.abs(p[i])).isLessThanOrEqualTo(limit2);
    }
    assertThat(net.parameterCount()).isEqualTo(8 * 24 + 24 + 24 * 3 + 3);
    assertThat(net.initialParameters(5)).containsExactly(p);
  }

  static Dataset randomData(int rows, int features, int classes, long seed) {
    SplitMix64 rng = new SplitMix64(seed);
    double[] x = new double[rows * features];
    int[] y = new int[rows];
    for (int i = 0; i < x.length; i++) {
      x[i] = rng.nextGaussian();
    }
    for (int r = 0; r < rows; r++) {
      y[r] = rng.nextInt(classes);
    }
    List<String> names = new java.util.ArrayList<>();
    for (int f = 0; f < features; f++) {
      names.add("f" + f);
    }
    List<String> classNames = new java.util.ArrayList<>();
    for (int k = 0; k < classes; k++) {
      classNames.add("c" + k);
    }
    return new Dataset(x, y, names, classNames);
  }
}
