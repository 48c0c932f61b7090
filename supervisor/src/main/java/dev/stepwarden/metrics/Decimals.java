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

  private static final java.lang.invoke.VarHandle LE_LONGS =
      java.lang.invoke.MethodHandles.byteArrayViewVarHandle(long[].class,
          java.nio.ByteOrder.LITTLE_ENDIAN);

  /** The eight bytes {@code b[at, at+8)}, the first in the lowest byte. */
  static long eightBytes(byte[] b, int at) {
    return (long) LE_LONGS.get(b, at);
  }

  /** Whether all eight bytes of {@link #eightBytes} are ASCII digits (Lemire 2021, s. 6). */
  static boolean eightDigits(long w) {
    return ((w & 0xF0F0_F0F0_F0F0_F0F0L)
        | (((w + 0x0606_0606_0606_0606L) & 0xF0F0_F0F0_F0F0_F0F0L) >>> 4))
        == 0x3333_3333_3333_3333L;
  }

  /** The value of eight ASCII digits read by {@link #eightBytes}, first digit most significant. */
  static int eightDigitValue(long w) {
    w -= 0x3030_3030_3030_3030L;
    w = w * 10 + (w >>> 8); // pairs of digits
    w = ((w & 0x0000_00FF_0000_00FFL) * (100 + (1_000_000L << 32))
        + ((w >>> 16) & 0x0000_00FF_0000_00FFL) * (1 + (10_000L << 32))) >>> 32;
    return (int) w;
  }

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
    byte[] b = new byte[to - from];
    for (int k = from; k < to; k++) {
      char c = s.charAt(k);
      b[k - from] = c < 0x80 ? (byte) c : (byte) 0x7F; // no number has a non-ASCII char
    }
    return parse(b, 0, b.length);
  }

  /** Like {@link #parse(CharSequence, int, int)} on ASCII bytes {@code s[from, to)}. */
  static double parse(byte[] s, int from, int to) {
    if (from >= to) {
      return NOT_A_NUMBER;
    }
    int i = from;
    boolean neg = false;
    int c = s[i];
    if (c == '-' || c == '+') {
      neg = c == '-';
      if (++i == to) {
        return NOT_A_NUMBER;
      }
      c = s[i];
    }
    if (c > '9' || (c < '0' && c != '.')) {
      return nonFinite(s, i, to, neg);
    }
    long mant = 0;
    int digits = 0; // significant digits kept in mant (18 fit a long)
    int exp10 = 0;
    boolean truncated = false;
    boolean anyDigit = false;
    while (i < to && (c = s[i]) >= '0' && c <= '9') {
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
    if (i < to && s[i] == '.') {
      i++;
      while (i < to && (c = s[i]) >= '0' && c <= '9') {
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
    if (i < to && ((c = s[i]) == 'e' || c == 'E')) {
      if (++i == to) {
        return NOT_A_NUMBER;
      }
      c = s[i];
      boolean eneg = false;
      if (c == '-' || c == '+') {
        eneg = c == '-';
        if (++i == to) {
          return NOT_A_NUMBER;
        }
      }
      int e = 0;
      boolean eDigit = false;
      while (i < to && (c = s[i]) >= '0' && c <= '9') {
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
    return value(mant, exp10, truncated, neg, s, from, to);
  }

  /**
   * The double of a token {@code s[from, to)} already scanned into its first 18 significant
   * digits {@code mant} (leading zeros skipped), the power of ten {@code exp10} that scales them,
   * whether nonzero digits were dropped ({@code truncated}) and the sign: the tail of {@link
   * #parse(byte[], int, int)}, for scanners that read the digits themselves.
   */
  static double value(long mant, int exp10, boolean truncated, boolean neg, byte[] s, int from,
      int to) {
    if (mant == 0) {
      return neg ? -0.0 : 0.0;
    }
    if (!truncated && mant <= MAX_EXACT && exp10 >= -22 && exp10 <= 22) {
      double d = (double) mant;
      d = exp10 >= 0 ? d * POW10[exp10] : d / POW10[-exp10];
      return neg ? -d : d;
    }
    if (!truncated) {
      double d = eiselLemire(mant, exp10, neg);
      if (!Double.isNaN(d)) {
        return d;
      }
    }
    return slow(new String(s, from, to - from, java.nio.charset.StandardCharsets.ISO_8859_1));
  }

  // Eisel-Lemire (Lemire 2021, "Number parsing at a gigabyte per second", Software: Practice and
  // Experience 51(8), s. 5): the 17-digit shortest representations Python and Java print are
  // beyond Clinger's fast path; multiplying the normalized significand by a 128-bit truncation
  // of 10^q gives the correctly rounded double unless the product lies too close to a halfway
  // point, in which case NaN sends the token to the JDK.
  private static final int MIN_Q = -342;
  private static final int MAX_Q = 308;
  /** POW10_HI/LO[q - MIN_Q]: floor(10^q * 2^(127 - floor(log2 10^q))), in [2^127, 2^128). */
  private static final long[] POW10_HI = new long[MAX_Q - MIN_Q + 1];
  private static final long[] POW10_LO = new long[MAX_Q - MIN_Q + 1];

  static {
    java.math.BigInteger ten = java.math.BigInteger.TEN;
    java.math.BigInteger mask64 = java.math.BigInteger.ONE.shiftLeft(64)
        .subtract(java.math.BigInteger.ONE);
    for (int q = MIN_Q; q <= MAX_Q; q++) {
      int p = (217706 * q) >> 16; // floor(log2 10^q) for |q| <= 348
      java.math.BigInteger m;
      if (q >= 0) {
        java.math.BigInteger v = ten.pow(q);
        int shift = 127 - p;
        m = shift >= 0 ? v.shiftLeft(shift) : v.shiftRight(-shift);
      } else {
        m = java.math.BigInteger.ONE.shiftLeft(127 - p).divide(ten.pow(-q));
      }
      if (m.bitLength() != 128) {
        throw new AssertionError("power-of-ten table: 10^" + q + " is not normalized");
      }
      POW10_HI[q - MIN_Q] = m.shiftRight(64).longValue();
      POW10_LO[q - MIN_Q] = m.and(mask64).longValue();
    }
  }

  /** {@code mant * 10^q} correctly rounded, or NaN when this method cannot decide. */
  static double eiselLemire(long mant, int q, boolean neg) {
    if (mant <= 0 || q < MIN_Q || q > MAX_Q) {
      return Double.NaN;
    }
    int clz = Long.numberOfLeadingZeros(mant);
    long w = mant << clz;
    long exp2 = ((217706L * q) >> 16) + 64 + 1023 - clz;
    long tHi = POW10_HI[q - MIN_Q];
    long tLo = POW10_LO[q - MIN_Q];
    long xLo = w * tHi;
    long xHi = Math.multiplyHigh(w, tHi) + ((tHi >> 63) & w) + ((w >> 63) & tHi);
    if ((xHi & 0x1FF) == 0x1FF && Long.compareUnsigned(xLo + w, w) < 0) {
      long yLo = w * tLo;
      long yHi = Math.multiplyHigh(w, tLo) + ((tLo >> 63) & w) + ((w >> 63) & tLo);
      long mergedHi = xHi;
      long mergedLo = xLo + yHi;
      if (Long.compareUnsigned(mergedLo, xLo) < 0) {
        mergedHi++;
      }
      if ((mergedHi & 0x1FF) == 0x1FF && mergedLo + 1 == 0
          && Long.compareUnsigned(yLo + w, w) < 0) {
        return Double.NaN;
      }
      xHi = mergedHi;
      xLo = mergedLo;
    }
    long msb = xHi >>> 63;
    long m = xHi >>> (msb + 9);
    exp2 -= 1 ^ msb;
    if (xLo == 0 && (xHi & 0x1FF) == 0 && (m & 3) == 1) {
      return Double.NaN; // exactly halfway: let the JDK break the tie
    }
    m += m & 1;
    m >>>= 1;
    if ((m >>> 53) > 0) {
      m >>>= 1;
      exp2++;
    }
    if (exp2 <= 0 || exp2 >= 0x7FF) {
      return Double.NaN; // subnormal or overflow: rare, the JDK handles them
    }
    long bits = (exp2 << 52) | (m & 0x000F_FFFF_FFFF_FFFFL);
    if (neg) {
      bits |= Long.MIN_VALUE;
    }
    return Double.longBitsToDouble(bits);
  }

  private static double slow(String s) {
    try {
      return Double.parseDouble(s);
    } catch (NumberFormatException e) {
      return NOT_A_NUMBER;
    }
  }

  /** nan, inf, infinity in any case (the sign already consumed). */
  private static double nonFinite(byte[] s, int i, int to, boolean neg) {
    int n = to - i;
    if (n == 3 && eq(s, i, "nan")) {
      return Double.NaN;
    }
    if ((n == 3 && eq(s, i, "inf")) || (n == 8 && eq(s, i, "infinity"))) {
      return neg ? Double.NEGATIVE_INFINITY : Double.POSITIVE_INFINITY;
    }
    return NOT_A_NUMBER;
  }

  private static boolean eq(byte[] s, int i, String lower) {
    for (int k = 0; k < lower.length(); k++) {
      if ((s[i + k] | 0x20) != lower.charAt(k)) {
        return false;
      }
    }
    return true;
  }
}
