package dev.stepwarden.checkpoints;

import static org.assertj.core.api.Assertions.assertThat;

import java.nio.file.Path;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;

class WatchClaimsTest {
  @TempDir Path tmp;

  @Test
  void aLiveClaimMatchingAFileIsSeenByAnotherRunAndGoneOnceClosed() throws Exception {
    Path folder = tmp.resolve("claims");
    Path ckpt = tmp.resolve("work/ckpt/model-B-1.pt");
    try (WatchClaims a = WatchClaims.claim(folder, tmp + "/work/ckpt/*.pt",
        tmp.resolve("run-A"))) {
      WatchClaims b = WatchClaims.claim(folder, tmp + "/work/ckpt/*.pt", tmp.resolve("run-B"));
      assertThat(a.sharedWith(ckpt, 0)).map(WatchClaims.Other::runDir)
          .contains(tmp.resolve("run-B").toString());
      assertThat(a.sharedWith(tmp.resolve("work/other/x.pt"), 0)).isEmpty();
      b.close();
      assertThat(a.others()).isEmpty();
    }
  }
}
