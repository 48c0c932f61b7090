package dev.stepwarden.rules;

import dev.stepwarden.rules.GuardFile.Condition;
import java.util.LinkedHashMap;
import java.util.Map;
import java.util.Optional;

/** Builds the detector for a validated {@link Condition}. */
final class Detectors {
  private Detectors() {}

  static Detector create(Condition c) {
    return switch (c.detector()) {
      case "breaks" -> new NonFinite(c.series());
      case "rises" -> new Spike(c.series(), c.number("above_best"), c.integer("samples"),
          c.number("smoothing"));
      case "flattens" -> new Flat(c.series(), c.integer("over"), c.number("gain_below"));
      default -> throw new IllegalArgumentException("detector '" + c.detector()
          + "' is not available in this build");
    };
  }

  private static final class NonFinite implements Detector {
    private final String series;

    NonFinite(String series) {
      this.series = series;
    }

    @Override
    public Optional<Evidence> offer(long step, double value) {
      if (Double.isFinite(value)) {
        return Optional.empty();
      }
      Map<String, Object> f = new LinkedHashMap<>();
      f.put("value", String.valueOf(value));
      f.put("step", step);
      return Optional.of(new Evidence("breaks", series + " is " + value + " at step " + step, f));
    }

    @Override
    public void reset() {}
  }

  private static final class Spike implements Detector {
    private final String series;
    private final double k;
    private final int samples;
    private final double beta;
    private double m;
    private long t;
    private double best = Double.POSITIVE_INFINITY;
    private long bestStep;
    private int run;

    Spike(String series, double k, int samples, double beta) {
      this.series = series;
      this.k = k;
      this.samples = samples;
      this.beta = beta;
    }

    @Override
    public Optional<Evidence> offer(long step, double value) {
      if (!Double.isFinite(value)) {
        return Optional.empty();
      }
      t++;
      m = beta * m + (1 - beta) * value;
      double smooth = m / (1 - Math.pow(beta, t));
      if (smooth < best) {
        best = smooth;
        bestStep = step;
      }
      run = smooth > k * best ? run + 1 : 0;
      if (run < samples) {
        return Optional.empty();
      }
      Map<String, Object> f = new LinkedHashMap<>();
      f.put("smoothed", smooth);
      f.put("best", best);
      f.put("best_step", bestStep);
      f.put("ratio", smooth / best);
      f.put("samples", run);
      return Optional.of(new Evidence("rises", String.format(java.util.Locale.ROOT,
          "smoothed %s %.4g is %.2fx its best %.4g (step %d) for %d samples", series, smooth,
          smooth / best, best, bestStep, run), f));
    }

    @Override
    public void reset() {
      m = 0;
      t = 0;
      best = Double.POSITIVE_INFINITY;
      run = 0;
    }
  }

  private static final class Flat implements Detector {
    private final String series;
    private final int over;
    private final double gain;
    private double best = Double.POSITIVE_INFINITY;
    private double bestAtWindowStart = Double.POSITIVE_INFINITY;
    private long bestStep;
    private int sinceImprovement;

    Flat(String series, int over, double gain) {
      this.series = series;
      this.over = over;
      this.gain = gain;
    }

    @Override
    public Optional<Evidence> offer(long step, double value) {
      if (!Double.isFinite(value)) {
        return Optional.empty();
      }
      if (value < bestAtWindowStart * (1 - gain) || bestAtWindowStart == Double.POSITIVE_INFINITY) {
        bestAtWindowStart = value;
        sinceImprovement = 0;
      } else {
        sinceImprovement++;
      }
      if (value < best) {
        best = value;
        bestStep = step;
      }
      if (sinceImprovement < over) {
        return Optional.empty();
      }
      Map<String, Object> f = new LinkedHashMap<>();
      f.put("window", over);
      f.put("best", best);
      f.put("best_step", bestStep);
      f.put("gain_below", gain);
      return Optional.of(new Evidence("flattens", String.format(java.util.Locale.ROOT,
          "%s %.4g has not improved by %.2f %% in %d evaluations", series, best, gain * 100,
          over), f));
    }

    @Override
    public void reset() {
      best = Double.POSITIVE_INFINITY;
      bestAtWindowStart = Double.POSITIVE_INFINITY;
      sinceImprovement = 0;
    }
  }
}
