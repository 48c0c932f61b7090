package dev.stepwarden.demo;

import static org.assertj.core.api.Assertions.assertThat;
import static org.assertj.core.api.Assertions.within;

import java.nio.file.Files;
import java.nio.file.Path;
import java.util.List;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;
import tools.jackson.databind.JsonNode;

/**
 * {@code --data}: training on a CSV. {@code demo/orchard-frost.csv} is invented for this test (a
 * scenario of our own): 240 nights of air temperature, dew point, wind, cloud cover (oktas) and
 * pressure (hPa, a distractor on a large scale), labelled 0 no alert, 1 frost watch, 2 frost
 * warning by a noisy "cold, calm and clear" rule.
 */
class DemoTrainerDataTest {
  @TempDir Path dir;

  private static Path resource(String name) throws Exception {
    return Path.of(DemoTrainerDataTest.class.getResource("/demo/" + name).toURI());
  }

  @Test
  void trainsOnACsvInferringTheClassesFromTheLastColumn() throws Exception {
    TrainerRun run = TrainerRun.of("--data", resource("orchard-frost.csv").toString(),
        "--epochs", "40", "--batch", "16", "--lr", "0.1", "--checkpoint-dir", dir.toString());

    assertThat(run.exitCode).as(run.stderr).isZero();
    assertThat(run.stderr).contains("192 train / 48 validation rows, 5 features, 3 classes");
    List<JsonNode> evals = run.evalLines();
    assertThat(evals).hasSize(40);
    double majorityShare = 143.0 / 240; // label 0 in the file
    assertThat(evals.get(evals.size() - 1).get("val_acc").asDouble()).isGreaterThan(majorityShare + 0.1);
    assertThat(evals.get(evals.size() - 1).get("val_loss").asDouble()).isLessThan(0.5 * Math.log(3));
  }

  @Test
  void resumingACsvRunNeedsNoDataOptionAndKeepsTheFile() throws Exception {
    String csv = resource("orchard-frost.csv").toString();
    TrainerRun.of("--data", csv, "--epochs", "1", "--checkpoint-dir", dir.toString());
    TrainerRun resumed = TrainerRun.of("--epochs", "2", "--checkpoint-dir", dir.toString(),
        "--resume", dir.resolve("last.ckpt").toString());

    assertThat(resumed.exitCode).as(resumed.stderr).isZero();
    assertThat(resumed.stderr).contains("orchard-frost.csv").contains("5 features, 3 classes");
  }

  @Test
  void featuresAreStandardisedWithTheTrainingRowsStatistics() throws Exception {
    Dataset all = CsvData.read(resource("orchard-frost.csv"));
    Dataset.Split split = all.split(0.2, 1);
    double[][] train = split.train().moments();
    for (int f = 0; f < all.features; f++) {
      assertThat(train[0][f]).isCloseTo(0.0, within(1e-12));
      assertThat(train[1][f]).isCloseTo(1.0, within(1e-12));
    }
    // validation is mapped with the training statistics, so it is only roughly centred
    double[][] validation = split.validation().moments();
    assertThat(validation[0][4]).isNotCloseTo(0.0, within(1e-6)).isBetween(-1.0, 1.0);
  }

  @Test
  void distinctLabelsBecomeClassesInNumericOrder() throws Exception {
    Path csv = Files.writeString(dir.resolve("labels.csv"),
        "a,b,kind\n1,2,10\n3,4,2\n5,6,7\n7,8,10\n9,9,2\n");
    Dataset d = CsvData.read(csv);

    assertThat(d.classNames).containsExactly("2", "7", "10");
    assertThat(d.y).containsExactly(2, 0, 1, 2, 0);
    assertThat(d.featureNames).containsExactly("a", "b");
  }

  @Test
  void aNonNumericFeatureNamesTheFileLineAndColumn() throws Exception {
    TrainerRun run = TrainerRun.of("--data", resource("bad-feature.csv").toString(),
        "--checkpoint-dir", dir.toString());

    assertThat(run.exitCode).isEqualTo(2);
    assertThat(run.stderr).contains("bad-feature.csv:3").contains("column 'b'").contains("'oops'");
  }

  @Test
  void aRaggedRowOrNonIntegerLabelIsRejectedWithTheLine() throws Exception {
    Path ragged = Files.writeString(dir.resolve("ragged.csv"), "a,b,y\n1,2,0\n1,0\n");
    Path fractional = Files.writeString(dir.resolve("frac.csv"), "a,y\n1,0\n2,1.5\n");

    assertThat(TrainerRun.of("--data", ragged.toString()).stderr)
        .contains("ragged.csv:3: 2 columns, but the header has 3");
    assertThat(TrainerRun.of("--data", fractional.toString()).stderr)
        .contains("frac.csv:3").contains("integer class label");
  }

  @Test
  void aMissingDataFileIsAnIoFailure() {
    TrainerRun run = TrainerRun.of("--data", dir.resolve("absent.csv").toString());
    assertThat(run.exitCode).isEqualTo(1);
    assertThat(run.stderr).contains("absent.csv");
  }
}
