package dev.stepwarden.controller;

import java.util.ArrayList;
import java.util.List;
import java.util.Locale;

/**
 * Keeps one of a few short branches run from the same checkpoint at different rates: one rung of
 * successive halving (Li et al. 2017, Hyperband, s3 and Algorithm 1: run every arm on the same
 * budget, keep the best 1/eta; here three arms and eta 3). Mini-batch losses are noisy, so the
 * comparison is noise-aware: a branch replaces the anchor (the rate the range test picked) only
 * when its mean training loss over the branch's tail is lower by more than {@link #Z} standard
 * errors of the difference (Welch's statistic); otherwise the anchor stays.
 */
public final class BranchChoice {
  /** One-sided 5 % point of the standard normal (standard normal table: 1.645). */
  public static final double Z = 1.645;

  private BranchChoice() {}

  /**
   * One branch: its rate and the training losses it produced, in order.
   *
   * @param losses non-finite values mean the branch diverged
   */
  public record Branch(double rate, double[] losses) {
    public Branch {
      losses = losses.clone();
    }
  }

  /**
   * The verdict.
   *
   * @param index the kept branch
   * @param means the tail mean of each branch (NaN: diverged or empty)
   * @param t Welch's statistic of the anchor's tail against the lowest tail (NaN when either
   *     is missing or they are the same branch)
   * @param note a sentence for the audit log
   */
  public record Verdict(int index, double rate, double[] means, double t, String note) {
    public Verdict {
      means = means.clone();
    }
  }

  /**
   * Chooses among {@code branches}, {@code anchor} being the index of the probe's pick. The tail
   * is the last half of each branch (its first steps still carry the previous rate's state).
   */
  public static Verdict choose(List<Branch> branches, int anchor) {
    if (anchor < 0 || anchor >= branches.size()) {
      throw new IllegalArgumentException("anchor " + anchor + " is not one of "
          + branches.size() + " branches");
    }
    int n = branches.size();
    double[] mean = new double[n];
    double[] var = new double[n];
    int[] count = new int[n];
    for (int i = 0; i < n; i++) {
      double[] l = branches.get(i).losses();
      int from = l.length / 2;
      double s = 0;
      double ss = 0;
      int c = 0;
      boolean finite = l.length > 0;
      for (int k = from; k < l.length; k++) {
        if (!Double.isFinite(l[k])) {
          finite = false;
          break;
        }
        s += l[k];
        ss += l[k] * l[k];
        c++;
      }
      if (!finite || c == 0) {
        mean[i] = Double.NaN;
        continue;
      }
      mean[i] = s / c;
      var[i] = c > 1 ? Math.max(0, (ss - c * mean[i] * mean[i]) / (c - 1)) : 0;
      count[i] = c;
    }
    int best = -1;
    for (int i = 0; i < n; i++) {
      if (!Double.isNaN(mean[i]) && (best < 0 || mean[i] < mean[best])) {
        best = i;
      }
    }
    List<String> parts = new ArrayList<>();
    for (int i = 0; i < n; i++) {
      parts.add(String.format(Locale.ROOT, "%.3g: %s", branches.get(i).rate(),
          Double.isNaN(mean[i]) ? "diverged" : String.format(Locale.ROOT, "%.4g", mean[i])));
    }
    String all = String.join(", ", parts);
    if (best < 0) {
      return new Verdict(-1, Double.NaN, mean, Double.NaN,
          "every branch diverged (" + all + ")");
    }
    if (best == anchor) {
      return new Verdict(anchor, branches.get(anchor).rate(), mean, Double.NaN,
          "the pick's branch had the lowest loss (" + all + ")");
    }
    if (Double.isNaN(mean[anchor])) {
      return new Verdict(best, branches.get(best).rate(), mean, Double.NaN,
          "the pick's branch diverged; kept the best other (" + all + ")");
    }
    double se = Math.sqrt(var[anchor] / count[anchor] + var[best] / count[best]);
    double t = se > 0 ? (mean[anchor] - mean[best]) / se : Double.POSITIVE_INFINITY;
    if (t > Z) {
      return new Verdict(best, branches.get(best).rate(), mean, t, String.format(Locale.ROOT,
          "rate %.3g beat the pick by %.1f standard errors (%s)", branches.get(best).rate(), t,
          all));
    }
    return new Verdict(anchor, branches.get(anchor).rate(), mean, t, String.format(Locale.ROOT,
        "no branch beat the pick by more than noise (%.1f standard errors < %.3f; %s)", t, Z,
        all));
  }
}
