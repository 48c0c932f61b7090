package dev.stepwarden.rules;

import static org.assertj.core.api.Assertions.assertThat;

import java.nio.file.Files;
import java.nio.file.Path;
import java.util.List;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;

/** Which word of a command is a script, and when there is none to look for. */
class CommandCheckTest {
  @TempDir
  Path dir;

  @Test
  void findsTheScriptAfterInterpreterOptionsAndSkipsModulesInlineCodeAndPlaceholders()
      throws Exception {
    Files.writeString(dir.resolve("train.py"), "");
    assertThat(CommandCheck.missingScript(List.of("python3", "-u", "train.py"), dir)).isEmpty();
    assertThat(CommandCheck.missingScript(List.of("/usr/bin/python3.11", "-W", "ignore",
        "nope.py", "--lr", "1"), dir)).get().asString().contains("'nope.py'");
    assertThat(CommandCheck.missingScript(List.of("bash", "run.sh"), dir)).isPresent();
    assertThat(CommandCheck.missingScript(List.of("python3", "-m", "pkg.train"), dir)).isEmpty();
    assertThat(CommandCheck.missingScript(List.of("python3", "-c", "print(1)"), dir)).isEmpty();
    assertThat(CommandCheck.missingScript(List.of("sh", "-c", "echo x"), dir)).isEmpty();
    assertThat(CommandCheck.missingScript(List.of("python3", "{run_dir}/t.py"), dir)).isEmpty();
    assertThat(CommandCheck.missingScript(List.of("./train", "x.py"), dir)).isEmpty();
  }

  @Test
  void onlyRestartSteeringNeedsTheRatePlaceholder() {
    GuardFile.Steer restart = new GuardFile.Steer(GuardFile.Steer.Method.RESTART, null, false);
    GuardFile.Steer file = new GuardFile.Steer(GuardFile.Steer.Method.CONTROL_FILE, null, false);
    assertThat(CommandCheck.rateUnreachable(List.of("python3", "t.py", "--lr", "3.0"), restart))
        .isPresent();
    assertThat(CommandCheck.rateUnreachable(List.of("python3", "t.py", "--lr=3.0"), file))
        .isEmpty();
    assertThat(CommandCheck.rateUnreachable(List.of("python3", "t.py",
        "--lr={learning_rate}"), restart)).isEmpty();
  }
}
