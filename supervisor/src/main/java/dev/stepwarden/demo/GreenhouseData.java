package dev.stepwarden.demo;

import java.util.List;

/**
 * The built-in data set: invented readings of a greenhouse climate controller, generated from a
 * seed. Nothing here was measured; the scenario is ours and only has to be plausible enough to make
 * a small network work for its loss.
 *
 * <p>Each row holds eight sensor readings; the label is the action the (invented) head grower
 * would take: {@code vent}, {@code heat} or {@code hold}. The rule is deliberately nonlinear so
 * that a softmax regression cannot fit it and a hidden layer pays off:
 *
 * <ul>
 *   <li>the temperature set point follows the hour of day along a sine (raw hour 0-24 is fed in,
 *       so the network must bend it);
 *   <li>venting only cools when outside air is cooler than inside: the decision multiplies the
 *       temperature excess by a smooth "outside is cooler" factor (an XOR-like interaction);
 *   <li>very humid air is vented when that helps and heated dry otherwise;
 *   <li>CO2 build-up and wind push the balance a little; soil moisture is a distractor.
 * </ul>
 *
 * The three action scores get Gaussian noise before the arg-max, so even a perfect model does not
 * reach zero loss (about one label in eight is "surprising").
 */
final class GreenhouseData {
  static final List<String> FEATURES =
      List.of(
          "air_temp_c",
          "humidity_pct",
          "co2_ppm",
          "light_w_m2",
          "outside_temp_c",
          "wind_m_s",
          "soil_moisture_pct",
          "hour");
  static final List<String> ACTIONS = List.of("vent", "heat", "hold");

  private static final double SCORE_NOISE = 0.35;

  private GreenhouseData() {}

  static Dataset generate(int samples, long seed) {
    SplitMix64 rng = new SplitMix64(SplitMix64.derive(seed, 0xda7a));
    int d = FEATURES.size();
    double[] x = new double[samples * d];
    int[] y = new int[samples];
    for (int i = 0; i < samples; i++) {
      double hour = rng.uniform(0, 24);
      double daylight = Math.max(0.0, Math.sin(Math.PI * (hour - 6.0) / 14.0)); // 06:00 to 20:00
      double light = daylight * rng.uniform(150, 900);
      double setPoint = 20.0 + 3.5 * Math.sin(2.0 * Math.PI * (hour - 9.0) / 24.0);
      double airTemp = setPoint + 0.004 * light + 4.0 * rng.nextGaussian();
      double outside = airTemp - 3.0 + 6.0 * rng.nextGaussian();
      double humidity = Math.min(100.0, rng.uniform(45, 90) + 6.0 * rng.nextGaussian());
      double co2 = rng.uniform(380, 1300);
      double wind = -3.0 * Math.log(1.0 - rng.nextDouble()); // exponential, mean 3 m/s
      double soil = rng.uniform(10, 60);

      double excess = airTemp - setPoint; // how far above the set point
      double cooler = Math.tanh((airTemp - outside) / 3.0); // +1: outside is much cooler
      double humid = Math.max(0.0, (humidity - 80.0) / 6.0);
      double vent =
          excess * cooler + 0.9 * humid * cooler + 0.6 * (co2 - 900.0) / 300.0 - 0.12 * wind;
      double heat = -excess + 0.7 * humid * (1.0 - cooler) - 0.5;
      double hold = 1.2 - 0.25 * Math.abs(excess);

      vent += SCORE_NOISE * rng.nextGaussian();
      heat += SCORE_NOISE * rng.nextGaussian();
      hold += SCORE_NOISE * rng.nextGaussian();
      int label = vent >= heat && vent >= hold ? 0 : heat >= hold ? 1 : 2;

      int o = i * d;
      x[o] = airTemp;
      x[o + 1] = humidity;
      x[o + 2] = co2;
      x[o + 3] = light;
      x[o + 4] = outside;
      x[o + 5] = wind;
      x[o + 6] = soil;
      x[o + 7] = hour;
      y[i] = label;
    }
    return new Dataset(x, y, FEATURES, ACTIONS);
  }
}
