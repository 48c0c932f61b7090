package dev.stepwarden.detectors;

import static org.assertj.core.api.Assertions.assertThat;

import org.junit.jupiter.api.Test;

class FiguresTest {

  @Test
  void writesNumbersPlainlyWithFourSignificantDigits() {
    assertThat(Figures.num(0.41204)).isEqualTo("0.412");
    assertThat(Figures.num(1234.56)).isEqualTo("1235");
    assertThat(Figures.num(-0.000123456)).isEqualTo("-0.0001235");
    assertThat(Figures.num(3.0)).isEqualTo("3");
    assertThat(Figures.num(2.5e-9)).isEqualTo("2.500e-09");
    assertThat(Figures.num(0)).isEqualTo("0");
  }

  @Test
  void writesPValuesAndPercentages() {
    assertThat(Figures.p(0.3071)).isEqualTo("= 0.31");
    assertThat(Figures.p(0.00123)).isEqualTo("= 0.0012");
    assertThat(Figures.p(0.00001)).isEqualTo("< 0.0001");
    assertThat(Figures.percent(0.005)).isEqualTo("0.5 %");
    assertThat(Figures.percent(0.0014286)).isEqualTo("0.143 %");
  }

  @Test
  void keepsNonFiniteFiguresJsonSafe() {
    assertThat(Figures.of(Double.NaN)).isEqualTo("NaN");
    assertThat(Figures.of(Double.POSITIVE_INFINITY)).isEqualTo("Infinity");
    assertThat(Figures.of(1.5)).isEqualTo(1.5);
  }
}
