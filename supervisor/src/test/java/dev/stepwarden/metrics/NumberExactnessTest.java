package dev.stepwarden.metrics;

import static org.assertj.core.api.Assertions.assertThat;

import java.math.BigDecimal;
import java.util.Locale;
import java.util.Map;
import net.jqwik.api.Arbitraries;
import net.jqwik.api.Arbitrary;
import net.jqwik.api.ForAll;
import net.jqwik.api.Property;
import net.jqwik.api.Provide;
import org.junit.jupiter.api.Test;

/**
 * A number printed in any common float format reads back bit for bit. The reference for what a
 * decimal text means is {@code new BigDecimal(text).doubleValue()}, which rounds the exact
 * decimal value to the nearest double (java.math.BigDecimal#doubleValue, JDK 17 docs: "as if"
 * correctly rounded per IEEE 754 round-to-nearest); for the shortest round-trip forms the
 * expectation is simply the original double.
 */
class NumberExactnessTest {
  private final JsonLineParser json = new JsonLineParser();

  @Provide
  Arbitrary<Double> anyFinite() {
    Arbitrary<Double> raw = Arbitraries.longs().map(Double::longBitsToDouble)
        .filter(Double::isFinite);
    Arbitrary<Double> trainerLike = Arbitraries.doubles().between(-10, 10).ofScale(17);
    Arbitrary<Double> small = Arbitraries.doubles().between(1e-9, 1e-2).ofScale(20);
    return Arbitraries.frequencyOf(
        net.jqwik.api.Tuple.of(4, raw), net.jqwik.api.Tuple.of(3, trainerLike),
        net.jqwik.api.Tuple.of(2, small));
  }

  private double readBack(String token) {
    Map<String, Double> f = Fieldset.parse(json, "{\"loss\": " + token + "}");
    assertThat(f).as("token %s", token).containsKey("loss");
    return f.get("loss");
  }

  private static long bits(double d) {
    return Double.doubleToRawLongBits(d);
  }

  @Property(tries = 1500)
  void javaDoubleToStringReadsBackBitForBit(@ForAll("anyFinite") double d) {
    assertThat(bits(readBack(Double.toString(d)))).isEqualTo(bits(d));
  }

  @Property(tries = 1500)
  void pythonReprStyleReadsBackBitForBit(@ForAll("anyFinite") double d) {
    String repr = pythonRepr(d);
    assertThat(bits(readBack(repr))).as(repr).isEqualTo(bits(d));
  }

  @Property(tries = 1500)
  void percentSeventeenGReadsBackBitForBit(@ForAll("anyFinite") double d) {
    // 17 significant digits always identify a double (IEEE 754-2008, s. 5.12.2)
    String s = String.format(Locale.ROOT, "%.17g", d);
    assertThat(bits(readBack(s))).as(s).isEqualTo(bits(d));
  }

  @Property(tries = 1500)
  void percentSixGAndPercentEReadAsTheNearestDoubleOfTheirText(@ForAll("anyFinite") double d) {
    for (String fmt : new String[] {"%.6g", "%e", "%.4f", "%.3e", "%g"}) {
      String s = String.format(Locale.ROOT, fmt, d);
      assertThat(bits(readBack(s))).as(s).isEqualTo(bits(nearest(s)));
    }
  }

  @Property(tries = 2000)
  void integersAndExponentFormsReadExactly(@ForAll long mantissa, @ForAll("exponents") int e) {
    String s = mantissa + "e" + e;
    assertThat(bits(readBack(s))).as(s).isEqualTo(bits(nearest(s)));
  }

  @Property(tries = 3000)
  void eiselLemirePathAgreesWithTheJdkOnSeventeenDigitSignificands(
      @ForAll("significands") long mantissa, @ForAll("wideExponents") int q) {
    // Lemire 2021 (Software: Practice and Experience 51(8), s. 5) either returns the correctly
    // rounded double or gives up; the JDK's Double.parseDouble is the reference.
    double d = Decimals.eiselLemire(mantissa, q, false);
    String text = mantissa + "e" + q;
    if (!Double.isNaN(d)) {
      assertThat(bits(d)).as(text).isEqualTo(bits(Double.parseDouble(text)));
    }
    assertThat(bits(readBack(text))).as(text).isEqualTo(bits(nearest(text)));
  }

  @Test
  void halfwayCasesBetweenTwoDoublesRoundToEven() {
    // 2^53 + 1 is exactly halfway between 2^53 and 2^53 + 2: ties go to the even significand
    // (IEEE 754-2008, s. 4.3.1, roundTiesToEven); so is 2^53 + 3, which rounds up.
    assertThat(readBack("9007199254740993")).isEqualTo(9007199254740992.0);
    assertThat(readBack("9007199254740995")).isEqualTo(9007199254740996.0);
    assertThat(readBack("9007199254740993e10")).isEqualTo(Double.parseDouble("9007199254740993e10"));
    // the largest and smallest normal doubles in their 17-digit spelling
    assertThat(readBack("1.7976931348623157e308")).isEqualTo(Double.MAX_VALUE);
    assertThat(readBack("2.2250738585072014e-308")).isEqualTo(Double.MIN_NORMAL);
  }

  @Provide
  Arbitrary<Long> significands() {
    return Arbitraries.frequencyOf(
        net.jqwik.api.Tuple.of(3, Arbitraries.longs().between(10_000_000_000_000_000L,
            99_999_999_999_999_999L)),
        net.jqwik.api.Tuple.of(1, Arbitraries.longs().between(1, 999_999_999_999_999_999L)));
  }

  @Provide
  Arbitrary<Integer> wideExponents() {
    return Arbitraries.integers().between(-360, 320);
  }

  /** The nearest double of a decimal text; BigDecimal has no negative zero, so keep the sign. */
  private static double nearest(String text) {
    double d = new BigDecimal(text).doubleValue();
    return d == 0 && text.startsWith("-") ? -0.0 : d;
  }

  @Provide
  Arbitrary<Integer> exponents() {
    return Arbitraries.integers().between(-340, 320);
  }

  @Test
  void signedZeroAndBoundaryValuesKeepTheirBits() {
    assertThat(bits(readBack("-0.0"))).isEqualTo(bits(-0.0));
    assertThat(bits(readBack("0e10"))).isEqualTo(bits(0.0));
    assertThat(readBack("4.9e-324")).isEqualTo(Double.MIN_VALUE);
    assertThat(readBack("1.7976931348623157e308")).isEqualTo(Double.MAX_VALUE);
    assertThat(readBack("1e400")).isEqualTo(Double.POSITIVE_INFINITY); // overflow rounds to inf
    assertThat(readBack("9007199254740993")).isEqualTo(9007199254740992.0); // 2^53+1 ties even
    assertThat(readBack("0.1")).isEqualTo(0.1);
    assertThat(readBack("123456789012345678901234567890")).isEqualTo(1.2345678901234568e29);
  }

  /** Python's float repr (value recalled from memory: shortest digits; 'e' form when the decimal
   * exponent is below -4 or at least 16, with a signed two-digit exponent). */
  static String pythonRepr(double d) {
    if (d == 0) {
      return (1 / d < 0) ? "-0.0" : "0.0";
    }
    BigDecimal b = new BigDecimal(Double.toString(d)).stripTrailingZeros();
    // shortest round-trip digits: try increasing precision
    for (int p = 1; p <= 17; p++) {
      BigDecimal r = new BigDecimal(d).round(new java.math.MathContext(p));
      if (r.doubleValue() == d) {
        b = r.stripTrailingZeros();
        break;
      }
    }
    String digits = b.unscaledValue().abs().toString();
    int exp = digits.length() - 1 - b.scale(); // decimal exponent of the first digit
    String sign = d < 0 ? "-" : "";
    if (exp < -4 || exp >= 16) {
      String m = digits.length() == 1 ? digits : digits.charAt(0) + "." + digits.substring(1);
      return sign + m + "e" + (exp < 0 ? "-" : "+") + String.format(Locale.ROOT, "%02d",
          Math.abs(exp));
    }
    String plain = b.abs().toPlainString();
    return sign + (plain.contains(".") ? plain : plain + ".0");
  }

  @Test
  void pythonReprHelperWritesTheKnownSpellings() {
    // (values recalled from memory of CPython's repr)
    assertThat(pythonRepr(1e-5)).isEqualTo("1e-05");
    assertThat(pythonRepr(0.0001)).isEqualTo("0.0001");
    assertThat(pythonRepr(1e16)).isEqualTo("1e+16");
    assertThat(pythonRepr(123.0)).isEqualTo("123.0");
    assertThat(pythonRepr(0.1 + 0.2)).isEqualTo("0.30000000000000004");
  }
}
