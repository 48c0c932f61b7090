package dev.stepwarden.detectors;

import dev.stepwarden.rules.GuardFile.Condition;

/** Builds the detector for a validated {@link Condition}; the parameters come from Catalogue. */
public final class Detectors {
  private Detectors() {}

  public static Detector create(Condition c) {
    String s = c.series();
    return switch (c.detector()) {
      case "breaks" -> new NonFiniteDetector(s);
      case "rises" -> new SpikeDetector(s, c.number("above_best"), c.integer("samples"),
          c.number("smoothing"));
      case "climbs" -> new GrowthDetector(s, c.integer("over"), c.number("p_below"));
      case "wobbles" -> new OscillationDetector(s, c.integer("over"),
          c.number("autocorr_below"), c.number("net_change_below"));
      case "flattens" -> new PlateauDetector(s, c.integer("over"), c.number("gain_below"),
          c.number("p_below"));
      case "creeps" -> new CreepDetector(s, c.integer("over"), c.number("p_below"),
          c.number("pace_below"));
      case "overfits" -> {
        OverfitDetector.Kind kind = OverfitDetector.Kind.valueOf((String) c.params()
            .get("criterion"));
        Object above = c.params().get("above");
        double threshold = above != null ? ((Number) above).doubleValue() : switch (kind) {
          case GL -> OverfitDetector.DEFAULT_GL_THRESHOLD;
          case PQ -> OverfitDetector.DEFAULT_PQ_THRESHOLD;
          case UP -> OverfitDetector.DEFAULT_UP_STRIPS;
        };
        yield new OverfitDetector(s, kind, threshold, c.integer("strip"));
      }
      case "stuck_at_chance" -> new ChanceLevelDetector(s, c.integer("classes"),
          c.number("tolerance"), c.integer("by_step"), ChanceLevelDetector.DEFAULT_BETA);
      default -> throw new IllegalArgumentException("no detector named '" + c.detector() + "'");
    };
  }
}
