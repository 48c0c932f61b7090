package dev.stepwarden.queue;

import static org.assertj.core.api.Assertions.assertThat;

import java.nio.file.Path;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;

/** The queue's and serve's options in names of our own; the old spellings get a hint. */
class QueueNamesTest {
  @TempDir
  Path tmp;

  @Test
  void theOldSpellingsAreRefusedWithTheNewName() throws Exception {
    Path rules = Fixtures.guardFile(tmp, tmp.resolve("events.log"), 1, "0");
    String h = tmp.resolve("home").toString();
    assertThat(Fixtures.failing(2, "queue", "add", "--home", h, "--rules", rules.toString(),
        "--study", "lr-sweep")).contains("--study is now --cohort");
    assertThat(Fixtures.failing(2, "serve", "--home", h, "--median-min-runs", "4"))
        .contains("--median-min-runs is now --median-quorum");
    assertThat(Fixtures.failing(2, "serve", "--home", h, "--median-min-step=100"))
        .contains("--median-min-step is now --median-from-step");
  }

  @Test
  void noQueueOrServeOptionKeepsTheOldNames() {
    String help = Fixtures.cli("queue", "add", "--help") + Fixtures.cli("serve", "--help");
    assertThat(help).doesNotContain("--study").doesNotContain("--median-min")
        .contains("--cohort").contains("--median-quorum").contains("--median-from-step");
  }
}
