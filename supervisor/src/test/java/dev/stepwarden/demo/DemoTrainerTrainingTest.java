package dev.stepwarden.demo;

import static org.assertj.core.api.Assertions.assertThat;

import java.nio.file.Path;
import java.util.List;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;
import tools.jackson.databind.JsonNode;

/** Real training on the invented greenhouse data (a scenario of our own). */
class DemoTrainerTrainingTest {
  private static final double LN_3 = Math.log(3); // loss of a uniform guess over 3 classes

  @TempDir Path dir;

  @Test
  void sensibleRateBringsValidationLossWellBelowLnThree() {
    TrainerRun run =
        TrainerRun.of("--lr", "0.3", "--epochs", "15", "--checkpoint-dir", dir.toString());

    assertThat(run.exitCode).as(run.stderr).isZero();
    List<JsonNode> evals = run.evalLines();
    assertThat(evals).hasSize(15);
    double first = run.stepLines().get(0).get("loss").asDouble();
    double last = evals.get(evals.size() - 1).get("val_loss").asDouble();
    // Glorot-initialised logits are small, so the first loss sits near ln 3 (the uniform guess)
    assertThat(first).isBetween(0.7 * LN_3, 1.5 * LN_3);
    assertThat(last).isLessThan(0.4 * LN_3);
    assertThat(evals.get(evals.size() - 1).get("val_acc").asDouble()).isGreaterThan(0.8);
  }

  @Test
  void hiddenLayersBeatSoftmaxRegressionOnTheNonlinearRule() {
    // the invented rule multiplies features (excess heat x "outside is cooler"), so a linear
    // model must fall short: this is a property we built into the data, checked here
    double linear = bestValidationLoss(0, 0.3);
    double hidden = bestValidationLoss(2, 0.3);
    System.out.printf("best val_loss after 20 epochs: linear %.4f, two tanh layers %.4f%n",
        linear, hidden);
    assertThat(hidden).isLessThan(0.75 * linear);
  }

  @Test
  void rateTenTimesTooLargeGivesRaggedTrainingAndStallsValidation() {
    TrainerOptions o = options(2, 30);
    Dataset.Split split = GreenhouseData.generate(o.samples, o.seed).split(0.2, o.seed);
    List<Sweep.Row> rows = Sweep.run(o, split, new double[] {0.3, 3.0});
    Sweep.Row good = rows.get(0);
    Sweep.Row big = rows.get(1);
    assertThat(big.bestValidationLoss()).isGreaterThan(2 * good.bestValidationLoss());
    assertThat(big.lastEpochTrainSd()).isGreaterThan(2 * good.lastEpochTrainSd());
  }

  @Test
  void sameSeedGivesIdenticalLinesAndAnotherSeedDoesNot() {
    String[] a = {"--epochs", "2", "--checkpoint-dir", dir.resolve("a").toString()};
    String[] b = {"--epochs", "2", "--checkpoint-dir", dir.resolve("b").toString()};
    String[] c = {"--epochs", "2", "--seed", "2", "--checkpoint-dir", dir.resolve("c").toString()};
    List<String> first = TrainerRun.of(a).lines;
    assertThat(TrainerRun.of(b).lines).isEqualTo(first);
    assertThat(TrainerRun.of(c).lines).isNotEqualTo(first);
  }

  @Test
  void keepsGoingAndPrintsNanAsAStringWhenTheRateOverflowsTheWeights() {
    TrainerRun run =
        TrainerRun.of("--lr", "1e308", "--epochs", "1", "--checkpoint-dir", dir.toString());

    assertThat(run.exitCode).isZero();
    assertThat(run.lines).anyMatch(l -> l.contains("\"loss\":\"nan\""));
    assertThat(run.lines.get(run.lines.size() - 1)).contains("\"val_loss\":\"nan\"");
    List<JsonNode> steps = run.stepLines();
    assertThat(steps).hasSize(75); // every step still reported: the supervisor decides
    assertThat(steps.get(steps.size() - 1).get("loss").asString()).isEqualTo("nan");
  }

  @Test
  void stepLinesCarryStepEpochLossAndTheExactRate() {
    TrainerRun run = TrainerRun.of("--lr", "0.05", "--epochs", "2", "--eval-every", "50",
        "--checkpoint-dir", dir.toString());

    List<JsonNode> steps = run.stepLines();
    assertThat(steps).hasSize(150);
    assertThat(steps.get(0).get("step").asLong()).isEqualTo(1);
    assertThat(steps.get(74).get("epoch").asLong()).isEqualTo(1);
    assertThat(steps.get(75).get("epoch").asLong()).isEqualTo(2);
    assertThat(run.lines.get(0)).matches("\\{\"step\":1,\"epoch\":1,\"loss\":[0-9.]+,\"lr\":0.05}");
    // every 50 steps, plus the end of training
    assertThat(run.evalLines()).extracting(n -> n.get("step").asLong()).containsExactly(50L, 100L, 150L);
    assertThat(dir.resolve("step-000050.ckpt")).exists();
    assertThat(dir.resolve("last.ckpt")).exists();
  }

  private static double bestValidationLoss(int layers, double rate) {
    TrainerOptions o = options(layers, 20);
    Dataset.Split split = GreenhouseData.generate(o.samples, o.seed).split(0.2, o.seed);
    return Sweep.run(o, split, new double[] {rate}).get(0).bestValidationLoss();
  }

  private static TrainerOptions options(int layers, int epochs) {
    TrainerOptions o = new TrainerOptions();
    o.layers = layers;
    o.epochs = epochs;
    return o;
  }
}
