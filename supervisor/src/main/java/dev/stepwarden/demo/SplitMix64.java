package dev.stepwarden.demo;

/**
 * The SplitMix64 generator (Steele, Lea and Flood 2014, "Fast splittable pseudorandom number
 * generators", OOPSLA), written out so that every stream is a pure function of its seed on every
 * JVM: {@link java.util.Random#nextGaussian} and friends are not pinned across JDK releases.
 */
final class SplitMix64 {
  private static final long GOLDEN_GAMMA = 0x9e3779b97f4a7c15L;

  private long state;

  SplitMix64(long seed) {
    this.state = seed;
  }

  /** A seed for an independent stream, derived from a base seed and a purpose tag. */
  static long derive(long seed, long tag) {
    return mix(seed ^ mix(tag + GOLDEN_GAMMA));
  }

  long nextLong() {
    state += GOLDEN_GAMMA;
    return mix(state);
  }

  private static long mix(long z) {
    z = (z ^ (z >>> 30)) * 0xbf58476d1ce4e5b9L;
    z = (z ^ (z >>> 27)) * 0x94d049bb133111ebL;
    return z ^ (z >>> 31);
  }

  /** Uniform in [0, 1) with 53 random bits. */
  double nextDouble() {
    return (nextLong() >>> 11) * 0x1.0p-53;
  }

  double uniform(double low, double high) {
    return low + (high - low) * nextDouble();
  }

  /** Uniform in [0, bound); the tiny modulo bias is irrelevant for shuffling a few thousand rows. */
  int nextInt(int bound) {
    return (int) ((nextLong() >>> 1) % bound);
  }

  /** Standard normal by the Box-Muller transform; no cached spare, so the state stays one long. */
  double nextGaussian() {
    double u1 = 1.0 - nextDouble(); // (0, 1]: log is finite
    double u2 = nextDouble();
    return Math.sqrt(-2.0 * Math.log(u1)) * Math.cos(2.0 * Math.PI * u2);
  }

  /** Fisher-Yates shuffle in place. */
  void shuffle(int[] values) {
    for (int i = values.length - 1; i > 0; i--) {
      int j = nextInt(i + 1);
      int t = values[i];
      values[i] = values[j];
      values[j] = t;
    }
  }
}
