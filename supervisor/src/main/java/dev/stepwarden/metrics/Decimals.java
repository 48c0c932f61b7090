package dev.stepwarden.metrics;

/**
 * Exact decimal-to-double conversion of a number token inside a line, without a substring.
 *
 * <p>Fast path (Clinger 1990, "How to read floating point numbers accurately", PLDI, s. 3): when
 * the decimal significand fits in 53 bits and the power of ten is at most 10^22, both are exact
 * doubles, so one IEEE multiplication or division rounds correctly. Every other token (17-digit
 * shortest representations, huge exponents) goes to {@link Double#parseDouble}, which is exact
 * too. So the result is always the correctly rounded value, bit for bit.
 */
final class Decimals {
  private Decimals() {}

  /** Returned when the token is not a number. A NaN with a payload no parse produces. */
  static final double NOT_A_NUMBER = Double.longBitsToDouble(0x7ff8_dead_beef_0001L);

  private static final double[] POW10 = {
      1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15,
      1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22};
  private static final long MAX_EXACT = 1L << 53;

  static boolean failed(double v) {
    return Double.doubleToRawLongBits(v) == Double.doubleToRawLongBits(NOT_A_NUMBER);
  }

  /**
   * Parses the whole of {@code s[from, to)} as a decimal number (optional sign, digits, optional
   * fraction, optional exponent) or a non-finite spelling. Returns {@link #NOT_A_NUMBER} if the
   * range is anything else.
   */
  static double parse(CharSequence s, int from, int to) {
    if (from >= to) {
      return NOT_A_NUMBER;
    }
    int i = from;
    boolean neg = false;
    char c = s.charAt(i);
    if (c == '-' || c == '+') {
      neg = c == '-';
      if (++i == to) {
        return NOT_A_NUMBER;
      }
      c = s.charAt(i);
    }
    if (c > '9' || (c < '0' && c != '.')) {
      return nonFinite(s, i, to, neg);
    }
    long mant = 0;
    int digits = 0; // significant digits kept in mant (18 fit a long)
    int exp10 = 0;
    boolean truncated = false;
    boolean anyDigit = false;
    while (i < to && (c = s.charAt(i)) >= '0' && c <= '9') {
      anyDigit = true;
      if (digits < 18) {
        if (mant != 0 || c != '0') {
          mant = mant * 10 + (c - '0');
          digits++;
        }
      } else {
        exp10++;
        truncated |= c != '0';
      }
      i++;
    }
    if (i < to && s.charAt(i) == '.') {
      i++;
      while (i < to && (c = s.charAt(i)) >= '0' && c <= '9') {
        anyDigit = true;
        if (digits < 18) {
          if (mant != 0 || c != '0') {
            mant = mant * 10 + (c - '0');
            digits++;
          }
          exp10--;
        } else {
          truncated |= c != '0';
        }
        i++;
      }
    }
    if (!anyDigit) {
      return NOT_A_NUMBER;
    }
    if (i < to && ((c = s.charAt(i)) == 'e' || c == 'E')) {
      if (++i == to) {
        return NOT_A_NUMBER;
      }
      c = s.charAt(i);
      boolean eneg = false;
      if (c == '-' || c == '+') {
        eneg = c == '-';
        if (++i == to) {
          return NOT_A_NUMBER;
        }
      }
      int e = 0;
      boolean eDigit = false;
      while (i < to && (c = s.charAt(i)) >= '0' && c <= '9') {
        eDigit = true;
        if (e < 100_000) {
          e = e * 10 + (c - '0');
        }
        i++;
      }
      if (!eDigit) {
        return NOT_A_NUMBER;
      }
      exp10 += eneg ? -e : e;
    }
    if (i != to) {
      return NOT_A_NUMBER;
    }
    if (mant == 0) {
      return neg ? -0.0 : 0.0;
    }
    if (!truncated && mant <= MAX_EXACT && exp10 >= -22 && exp10 <= 22) {
      double d = (double) mant;
      d = exp10 >= 0 ? d * POW10[exp10] : d / POW10[-exp10];
      return neg ? -d : d;
    }
    return slow(s, from, to);
  }

  private static double slow(CharSequence s, int from, int to) {
    try {
      return Double.parseDouble(s.subSequence(from, to).toString());
    } catch (NumberFormatException e) {
      return NOT_A_NUMBER;
    }
  }

  /** nan, inf, infinity in any case (the sign already consumed). */
  private static double nonFinite(CharSequence s, int i, int to, boolean neg) {
    int n = to - i;
    if (n == 3 && eq(s, i, "nan")) {
      return Double.NaN;
    }
    if ((n == 3 && eq(s, i, "inf")) || (n == 8 && eq(s, i, "infinity"))) {
      return neg ? Double.NEGATIVE_INFINITY : Double.POSITIVE_INFINITY;
    }
    return NOT_A_NUMBER;
  }

  private static boolean eq(CharSequence s, int i, String lower) {
    for (int k = 0; k < lower.length(); k++) {
      if ((s.charAt(i + k) | 0x20) != lower.charAt(k)) {
        return false;
      }
    }
    return true;
  }
}
