package dev.stepwarden.rules;

import static org.assertj.core.api.Assertions.assertThat;
import static org.assertj.core.api.Assertions.assertThatThrownBy;
import static org.junit.jupiter.api.Assertions.assertTimeoutPreemptively;
import static org.junit.jupiter.api.Assumptions.assumeTrue;

import java.nio.file.Files;
import java.nio.file.Path;
import java.time.Duration;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;

/** What is refused before a guard file is read: devices, FIFOs and folders have no size bound. */
class GuardFileSourceTest {
  @TempDir Path tmp;

  @Test
  void endlessDevicesAreRefusedWithoutReadingThem() {
    for (String device : new String[] {"/dev/zero", "/dev/urandom"}) {
      Path p = Path.of(device);
      assumeTrue(Files.exists(p), device + " exists on Linux");
      assertTimeoutPreemptively(Duration.ofSeconds(20), () ->
          assertThatThrownBy(() -> GuardFiles.load(p))
              .isInstanceOf(ConfigException.class)
              .hasMessageContaining("not a regular file")
              .hasMessageContaining(device));
    }
  }

  @Test
  void aFifoIsRefusedInsteadOfBlockingOnOpen() throws Exception {
    Path fifo = tmp.resolve("guards.yaml");
    int rc;
    try {
      rc = new ProcessBuilder("mkfifo", fifo.toString()).inheritIO().start().waitFor();
    } catch (java.io.IOException e) {
      rc = -1;
    }
    assumeTrue(rc == 0, "mkfifo is available");
    // Opening a FIFO for reading blocks until a writer comes: the refusal must come first.
    assertTimeoutPreemptively(Duration.ofSeconds(20), () ->
        assertThatThrownBy(() -> GuardFiles.load(fifo))
            .isInstanceOf(ConfigException.class)
            .hasMessageContaining("device, FIFO or socket"));
  }

  @Test
  void aFolderIsRefusedNamingWhatItIs() {
    assertThatThrownBy(() -> GuardFiles.load(tmp))
        .isInstanceOf(ConfigException.class).hasMessageContaining("a folder");
  }

  @Test
  void aRegularFileOverTheBoundIsRefusedAfterReadingOnlyTheBound() throws Exception {
    Path big = tmp.resolve("big.yaml");
    Files.writeString(big, "run:\n  learning_rate: 0.1\n#" + "x".repeat(YamlReader.MAX_BYTES));
    assertThatThrownBy(() -> GuardFiles.load(big))
        .isInstanceOf(ConfigException.class).hasMessageContaining("at most 1048576 bytes");
    Path fine = tmp.resolve("fine.yaml");
    Files.writeString(fine, "run:\n  learning_rate: 0.1\n");
    assertThat(GuardFiles.load(fine)).isNotNull();
  }
}
