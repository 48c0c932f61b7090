package dev.stepwarden.metrics;

import java.util.Collection;
import java.util.Locale;
import java.util.Optional;

/**
 * The nearest known word to a given one, for "did you mean" hints: edit distance with an adjacent
 * swap counted as one edit, or a word that starts with the given one. One description for the
 * guard-file loader's hints and the run's missing-key warning.
 */
public final class Nearest {
  private Nearest() {}

  /** The known word nearest to {@code given} when it is near enough to be a plausible intent. */
  public static Optional<String> of(String given, Collection<String> known) {
    String g = given.toLowerCase(Locale.ROOT);
    String best = null;
    int bestDistance = Integer.MAX_VALUE;
    for (String k : known) {
      int d = distance(g, k.toLowerCase(Locale.ROOT));
      if (d < bestDistance) {
        bestDistance = d;
        best = k;
      }
    }
    int allowed = Math.max(1, Math.min(3, given.length() / 3));
    if (best != null && bestDistance <= allowed) {
      return bestDistance == 0 && best.equals(given) ? Optional.empty() : Optional.of(best);
    }
    // A truncated word ("valid" for "validation") is far in edits but an obvious intent.
    for (String k : known) {
      if (g.length() >= 3 && k.toLowerCase(Locale.ROOT).startsWith(g)) {
        return Optional.of(k);
      }
    }
    return Optional.empty();
  }

  /** Levenshtein distance, with an adjacent swap counted as one edit (typos). */
  public static int distance(String a, String b) {
    int[][] d = new int[a.length() + 1][b.length() + 1];
    for (int i = 0; i <= a.length(); i++) {
      d[i][0] = i;
    }
    for (int j = 0; j <= b.length(); j++) {
      d[0][j] = j;
    }
    for (int i = 1; i <= a.length(); i++) {
      for (int j = 1; j <= b.length(); j++) {
        int cost = a.charAt(i - 1) == b.charAt(j - 1) ? 0 : 1;
        d[i][j] = Math.min(Math.min(d[i - 1][j] + 1, d[i][j - 1] + 1), d[i - 1][j - 1] + cost);
        if (i > 1 && j > 1 && a.charAt(i - 1) == b.charAt(j - 2)
            && a.charAt(i - 2) == b.charAt(j - 1)) {
          d[i][j] = Math.min(d[i][j], d[i - 2][j - 2] + 1);
        }
      }
    }
    return d[a.length()][b.length()];
  }
}
