package dev.stepwarden.stats;

/**
 * Exponential moving average with bias correction (Kingma &amp; Ba 2015, Adam, Algorithm 1):
 *
 * <pre>
 *   m_0 = 0,   m_t = b m_{t-1} + (1 - b) x_t,   mhat_t = m_t / (1 - b^t)
 * </pre>
 *
 * <p>Without the correction the average starts near 0 and creeps up to the level (a false
 * "improvement" at the start of every regime). It is computed in the equivalent update form
 * mhat_t = mhat_{t-1} + w_t (x_t - mhat_{t-1}) with gain w_t = (1 - b) / (1 - b^t); expanding
 * m_{t-1} = (1 - b^{t-1}) mhat_{t-1} gives the same value. The gain is exactly 1 at t = 1, so a
 * constant series yields the constant exactly from the first point, in floating point too.
 */
public final class Ema {
  private final double beta;
  /** 1 - b, the gain's numerator. */
  private final double oneMinusBeta;
  private double power = 1;
  /**
   * 1 - b^t has rounded to exactly 1: it stays 1 as b^t only shrinks, so the gain is 1 - b from
   * now on (the same double the division gave) and b^t need not be tracked further.
   */
  private boolean settled;
  private double value = Double.NaN;
  private long count;

  /** @param beta the decay b, 0 &lt;= b &lt; 1 (0 = no smoothing) */
  public Ema(double beta) {
    if (!(beta >= 0 && beta < 1)) {
      throw new IllegalArgumentException("EMA beta must be in [0, 1), got " + beta);
    }
    this.beta = beta;
    this.oneMinusBeta = 1 - beta;
  }

  /** Adds x_t; returns mhat_t. */
  public double offer(double x) {
    count++;
    double gain;
    if (settled) {
      gain = oneMinusBeta;
    } else {
      power *= beta;
      double denominator = 1 - power;
      gain = oneMinusBeta / denominator;
      settled = denominator == 1.0;
    }
    value = count == 1 ? x : value + gain * (x - value);
    return value;
  }

  /** mhat_t, or NaN before the first point. */
  public double value() {
    return value;
  }

  public long count() {
    return count;
  }

  public double beta() {
    return beta;
  }

  public void reset() {
    power = 1;
    settled = false;
    value = Double.NaN;
    count = 0;
  }
}
