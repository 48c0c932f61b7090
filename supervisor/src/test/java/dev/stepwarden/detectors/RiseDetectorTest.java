package dev.stepwarden.detectors;

import static org.assertj.core.api.Assertions.assertThat;

import java.util.Map;
import java.util.Optional;
import java.util.Random;
import org.junit.jupiter.api.Test;

class RiseDetectorTest {
  static Detector defaults() {
    return DetectorKind.RISES.create("train", Map.of());
  }

  /** Per-batch losses of a classifier that fits its training set: 0.006-0.03, a 0.13 now and then. */
  @Test
  void aFittedClassifiersOrdinaryBadBatchIsNotDivergence() {
    Detector d = defaults();
    Random r = new Random(15);
    for (int i = 0; i < 20_000; i++) {
      double v = 0.006 + 0.024 * r.nextDouble();
      if (i % 97 == 0) {
        v = 0.13;
      }
      assertThat(d.offer(i, v)).as("step " + i).isEmpty();
    }
  }

  @Test
  void aBlowUpIsCaughtOnItsThirdSampleWithTheNoiseUnitsInTheEvidence() {
    Detector d = defaults();
    Random r = new Random(3);
    for (int i = 0; i < 300; i++) {
      assertThat(d.offer(i, 0.5 + 0.05 * r.nextGaussian())).isEmpty();
    }
    assertThat(d.offer(300, 5.0)).isEmpty();
    assertThat(d.offer(301, 6.0)).isEmpty();
    Optional<Evidence> e = d.offer(302, 7.0);
    assertThat(e).isPresent();
    // band: median ~0.5, spread ~0.05 (IQR / 1.349 of a normal with sigma 0.05)
    double units = (double) e.get().figures().get("noise_units");
    assertThat(units).isBetween(100.0, 160.0);
    assertThat(e.get().summary()).contains("noise units above its band").contains("since step 300");
  }

  @Test
  void aRewindRestoresTheBandOfTheCheckpointsTimeWhileAFreshStartBuildsANewOne() {
    Detector rewound = defaults();
    Detector fresh = defaults();
    for (Detector d : new Detector[] {rewound, fresh}) {
      for (int i = 0; i < 400; i++) {
        d.offer(i, 1.0 + 0.01 * (i % 7));
      }
      for (int i = 400; i < 800; i++) {
        d.offer(i, 4.0 + 0.01 * (i % 7)); // the band drifts towards a worse level
      }
    }
    rewound.rewindTo(400);
    fresh.reset();
    boolean firedRewound = false;
    boolean firedFresh = false;
    for (int i = 401; i < 420; i++) {
      firedRewound |= rewound.offer(i, 4.0).isPresent();
      firedFresh |= fresh.offer(i, 4.0).isPresent();
    }
    assertThat(firedRewound).as("judged against the band of step 400 (level ~1)").isTrue();
    assertThat(firedFresh).as("a new generation's own band").isFalse();
  }
}
