package dev.stepwarden.demo;

import static org.assertj.core.api.Assertions.assertThat;

import java.nio.file.Path;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;
import org.junit.jupiter.params.ParameterizedTest;
import org.junit.jupiter.params.provider.CsvSource;

class TrainerOptionsTest {
  @TempDir Path dir;

  @ParameterizedTest(name = "{0}")
  @CsvSource(
      delimiter = '|',
      value = {
        "--lr abc          | --lr expects a number, got 'abc'",
        "--lr -1           | --lr expects a positive finite number",
        "--lr              | --lr needs a value",
        "--epochs 0        | --epochs must be at least 1, got 0",
        "--layers 3        | --layers must be between 0 and 2, got 3",
        "--batch 2.5       | --batch expects a whole number, got '2.5'",
        "--momentum 1      | --momentum expects a number in [0, 1)",
        "--wobble 3        | unknown option --wobble",
        "lr                | unexpected argument 'lr'",
        "--seed 1 --seed 2 | --seed is given twice",
        "--sweep=yes       | --sweep takes no value",
      })
  void badArgumentsExitTwoWithAMessageNamingTheOption(String args, String message) {
    TrainerRun run = TrainerRun.of(args.strip().split("\\s+"));

    assertThat(run.exitCode).isEqualTo(2);
    assertThat(run.stderr).startsWith("demo trainer: ").contains(message);
    assertThat(run.lines).isEmpty();
  }

  @Test
  void acceptsEqualsFormAndTreatsEmptyOrNoneResumeAsAFreshStart() throws Exception {
    TrainerOptions o = TrainerOptions.parse(new String[] {
        "--lr=0.5", "--epochs", "3", "--resume", "none", "--eval-every=7", "--step-delay-ms", "0"});
    assertThat(o.lr).isEqualTo(0.5);
    assertThat(o.epochs).isEqualTo(3);
    assertThat(o.resume).isNull();
    assertThat(o.evalEvery).isEqualTo(7);
    assertThat(o.given).contains("lr", "epochs", "resume");
    assertThat(TrainerOptions.parse(new String[] {"--resume", ""}).resume).isNull();

    TrainerRun run = TrainerRun.of("--resume", "", "--epochs", "1", "--checkpoint-dir", dir.toString());
    assertThat(run.exitCode).isZero();
    assertThat(run.stepLines().get(0).get("step").asLong()).isEqualTo(1);
  }

  @Test
  void samplesWithDataIsRefusedAsAmbiguous() {
    TrainerRun run = TrainerRun.of("--data", "x.csv", "--samples", "100");
    assertThat(run.exitCode).isEqualTo(2);
    assertThat(run.stderr).contains("--samples applies to the built-in data only");
  }

  @Test
  void helpPrintsUsageAndExitsZero() {
    TrainerRun run = TrainerRun.of("--help");
    assertThat(run.exitCode).isZero();
    assertThat(String.join("\n", run.lines)).contains("--checkpoint-dir DIR").contains("STEPWARDEN_CONTROL");
  }

  @Test
  void sweepPrintsOneRowPerRate() {
    TrainerRun run = TrainerRun.of("--sweep", "--epochs", "2", "--samples", "400",
        "--sweep-rates", "0.01,1");
    assertThat(run.exitCode).isZero();
    assertThat(run.lines).filteredOn(l -> !l.startsWith("#")).hasSize(3); // header + 2 rates
    assertThat(run.lines.get(2)).startsWith("0.01 ");
    assertThat(run.lines.get(3)).startsWith("1.0 ");
  }

  @Test
  void jsonLinesWriteNonFiniteNumbersAsStringsAndRatesExactly() {
    String line = new JsonLine().put("step", 3).put("loss", Double.NaN)
        .put("a", Double.POSITIVE_INFINITY).put("b", Double.NEGATIVE_INFINITY)
        .put("c", 0.123456789).putExact("lr", 0.0123456789).toString();
    assertThat(line).isEqualTo(
        "{\"step\":3,\"loss\":\"nan\",\"a\":\"inf\",\"b\":\"-inf\",\"c\":0.123457,\"lr\":0.0123456789}");
  }
}
