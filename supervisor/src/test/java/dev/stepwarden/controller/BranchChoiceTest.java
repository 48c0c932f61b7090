package dev.stepwarden.controller;

import static org.junit.jupiter.api.Assertions.assertEquals;
import static org.junit.jupiter.api.Assertions.assertTrue;

import dev.stepwarden.controller.BranchChoice.Branch;
import dev.stepwarden.controller.BranchChoice.Verdict;
import java.util.List;
import org.junit.jupiter.api.Test;

class BranchChoiceTest {
  /** The first half of a branch is not judged: the state of the previous rate still shows. */
  private static double[] branch(double[] tail) {
    double[] l = new double[tail.length * 2];
    java.util.Arrays.fill(l, 0, tail.length, 9.0);
    System.arraycopy(tail, 0, l, tail.length, tail.length);
    return l;
  }

  private static final double[] PICK = {0.52, 0.49, 0.55, 0.47, 0.51, 0.50};
  private static final double[] BETTER = {0.44, 0.47, 0.43, 0.46, 0.42, 0.45};

  @Test
  void aBranchClearlyBelowThePickReplacesItWithWelchsStatistic() {
    Verdict v = BranchChoice.choose(List.of(new Branch(0.05, branch(PICK)),
        new Branch(0.1, branch(PICK)), new Branch(0.2, branch(BETTER))), 1);
    assertEquals(2, v.index());
    assertEquals(0.2, v.rate());
    // scipy.stats.ttest_ind(PICK, BETTER, equal_var=False).statistic (scipy 1.x, a reference
    // library): 4.561301472674225
    assertEquals(4.561301472674225, v.t(), 1e-9);
  }

  @Test
  void aBranchLowerOnlyByNoiseLeavesThePick() {
    double[] slightly = {0.51, 0.48, 0.54, 0.46, 0.50, 0.49}; // 0.01 lower, spread 0.03
    Verdict v = BranchChoice.choose(List.of(new Branch(0.05, branch(slightly)),
        new Branch(0.1, branch(PICK)), new Branch(0.2, branch(PICK))), 1);
    assertEquals(1, v.index());
    assertTrue(v.t() < BranchChoice.Z, v.note());
  }

  @Test
  void aDivergedPickGivesWayToTheBestFiniteBranchAndAllDivergedKeepsNone() {
    double[] nan = {Double.NaN, Double.NaN, Double.NaN};
    Verdict v = BranchChoice.choose(List.of(new Branch(0.05, branch(BETTER)),
        new Branch(0.1, branch(nan)), new Branch(0.2, branch(PICK))), 1);
    assertEquals(0, v.index());
    Verdict none = BranchChoice.choose(List.of(new Branch(0.1, branch(nan)),
        new Branch(0.2, branch(nan))), 0);
    assertEquals(-1, none.index());
    assertTrue(none.note().contains("every branch diverged"), none.note());
  }
}
