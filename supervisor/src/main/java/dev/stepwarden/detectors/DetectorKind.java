package dev.stepwarden.detectors;

import java.util.Arrays;
import java.util.List;
import java.util.Map;
import java.util.Optional;

/**
 * The one description of each detector: its guard-file name, the series it watches by default,
 * its parameters with their exact ranges, whether its firing means divergence, the plain words
 * of {@code check} and the factory. The catalogue, the JSON Schema, {@code check}, the engine and
 * the constructors all read it, so they cannot disagree.
 */
public enum DetectorKind {
  BREAKS("breaks", "train", true, "the series reports NaN or an infinity", List.of()) {
    @Override
    public String explain(String s, Map<String, Object> p) {
      return s + " is NaN or infinite";
    }

    @Override
    Detector build(String s, Map<String, Object> p) {
      return new NonFiniteDetector(s);
    }
  },

  RISES("rises", "train", true, "the series leaves the band of its own recent healthy values"
      + " upward", List.of(
      Param.number("noise_units", 8.0, 0, true, 1e6, false, "Fire when the value sits more than"
          + " this many noise units (the spread of the band: interquartile range / 1.349) above"
          + " the band's level (the median of the last 'window' healthy values)..."),
      Param.factor("above_level", 3.0, 1, false, 1e6, "... and above this many times that"
          + " median (3x or 3), which keeps tiny losses near zero from counting as divergence..."),
      Param.integer("samples", 3, 1, 100_000, "... for this many samples in a row."),
      Param.integer("window", 200, 8, 10_000, "How many recent values of the current launch"
          + " make the band."))) {
    @Override
    public String explain(String s, Map<String, Object> p) {
      return s + " sits more than " + num(p, "noise_units") + " noise units above the band of"
          + " its last " + integer(p, "window") + " healthy values (their median and spread)"
          + " and above " + num(p, "above_level") + "x that median, for " + integer(p, "samples")
          + " samples in a row";
    }

    @Override
    Detector build(String s, Map<String, Object> p) {
      return new RiseDetector(s, number(p, "noise_units"), number(p, "above_level"),
          integer(p, "samples"), integer(p, "window"));
    }
  },

  CLIMBS("climbs", "train", true, "the series trends significantly upward by a sizeable amount",
      List.of(
      Param.integer("over", 30, 4, 200, "Window of samples for the trend test."),
      Param.number("p_below", 1e-4, 0, true, 1, true, "Significance level of the upward trend"
          + " test."),
      Param.fraction("rise_above", 0.1, 0, false, 1e6, false, "The rise over the window (Sen"
          + " slope x window) must be at least this fraction of the level the launch started at"
          + " (10% or 0.1; 0: any significant rise)."))) {
    @Override
    public String explain(String s, Map<String, Object> p) {
      return s + " trends upward over " + integer(p, "over") + " samples (Mann-Kendall, p < "
          + num(p, "p_below") + ") and rises by at least " + pct(p, "rise_above")
          + " of the level its launch started at";
    }

    @Override
    Detector build(String s, Map<String, Object> p) {
      return new GrowthDetector(s, integer(p, "over"), number(p, "p_below"),
          number(p, "rise_above"));
    }
  },

  WOBBLES("wobbles", "train", true, "the series sloshes up and down without net progress",
      List.of(
      Param.integer("over", 40, 8, 200, "Window of samples."),
      Param.number("autocorr_below", -0.75, -1, false, 0, false, "Lag-1 autocorrelation of"
          + " successive changes at or below this value means the changes keep flipping sign"
          + " (white noise alone gives -0.5)."),
      Param.fraction("net_change_below", 0.02, 0, false, 10, false, "... while the level moves"
          + " by less than this fraction over the window..."),
      Param.fraction("swing_above", 0.05, 0, false, 1e6, false, "... and the mean change"
          + " between successive samples is at least this fraction of the level the launch"
          + " started at (0: any swing)."))) {
    @Override
    public String explain(String s, Map<String, Object> p) {
      return s + " keeps changing direction over " + integer(p, "over")
          + " samples while moving less than " + pct(p, "net_change_below")
          + " and swinging by at least " + pct(p, "swing_above")
          + " of the level its launch started at";
    }

    @Override
    Detector build(String s, Map<String, Object> p) {
      return new OscillationDetector(s, integer(p, "over"), number(p, "autocorr_below"),
          number(p, "net_change_below"), number(p, "swing_above"));
    }
  },

  FLATTENS("flattens", "validation", false, "the best value has stopped improving", List.of(
      Param.integer("over", 5, 2, 200, "Number of evaluations without enough improvement."),
      Param.fraction("gain_below", 0.005, 0, false, 1, true, "The best value must improve by at"
          + " least this fraction within the window (0.5% or 0.005)."),
      Param.number("p_below", 0.2, 0, true, 1, true, "No plateau while a downward trend is"
          + " significant at this level."))) {
    @Override
    public String explain(String s, Map<String, Object> p) {
      return "the best " + s + " has not improved by " + pct(p, "gain_below") + " in "
          + integer(p, "over") + " evaluations and no downward trend is significant (p < "
          + num(p, "p_below") + ")";
    }

    @Override
    Detector build(String s, Map<String, Object> p) {
      return new PlateauDetector(s, integer(p, "over"), number(p, "gain_below"),
          number(p, "p_below"));
    }
  },

  CREEPS("creeps", "validation", false, "the series falls steadily but slowly", List.of(
      Param.integer("over", 8, 4, 200, "Window of evaluations."),
      Param.number("p_below", 0.001, 0, true, 1, true, "Significance level of the downward"
          + " trend."),
      Param.fraction("pace_below", 0.002, 0, true, 1, false, "A trend slower than this fraction"
          + " of the level per evaluation counts as slow."))) {
    @Override
    public String explain(String s, Map<String, Object> p) {
      return s + " falls significantly but by less than " + pct(p, "pace_below")
          + " per evaluation over " + integer(p, "over") + " evaluations";
    }

    @Override
    Detector build(String s, Map<String, Object> p) {
      return new CreepDetector(s, integer(p, "over"), number(p, "p_below"),
          number(p, "pace_below"));
    }
  },

  OVERFITS("overfits", "validation", false, "validation worsens while training still improves",
      List.of(
      Param.choice("criterion", "GL", List.of("GL", "PQ", "UP"), "Which of Prechelt's"
          + " criteria: GL (generalisation loss), PQ (GL over training progress), UP (rises"
          + " in successive strips)."),
      new Param("above", Param.Kind.NUMBER, null, 0, true, 1e6, false, null, true, "Threshold:"
          + " alpha for GL (default 5) and PQ (default 0.75), the whole number of strips s for"
          + " UP (default 3, at most 1000)."),
      Param.integer("strip", 5, 2, 1000, "Strip length k in training samples per"
          + " evaluation."))) {
    @Override
    public String explain(String s, Map<String, Object> p) {
      OverfitDetector.Kind k = OverfitDetector.Kind.valueOf(text(p, "criterion"));
      return "Prechelt's " + k + " criterion exceeds " + Param.num(OverfitDetector.threshold(k,
          p.get("above"))) + " (strips of " + integer(p, "strip") + " evaluations)";
    }

    @Override
    public Optional<String> conflict(Map<String, Object> p) {
      Object above = p.get("above");
      if ("UP".equals(p.get("criterion")) && above instanceof Number n
          && (n.doubleValue() != Math.rint(n.doubleValue()) || n.doubleValue() > 1000)) {
        return Optional.of("with criterion UP, 'above' counts strips: a whole number from 1 to"
            + " 1000, not " + n);
      }
      return Optional.empty();
    }

    @Override
    Detector build(String s, Map<String, Object> p) {
      OverfitDetector.Kind k = OverfitDetector.Kind.valueOf(text(p, "criterion"));
      return new OverfitDetector(s, k, OverfitDetector.threshold(k, p.get("above")),
          integer(p, "strip"));
    }
  },

  STUCK_AT_CHANCE("stuck_at_chance", "train", true, "the loss sits at chance level early on",
      List.of(
      Param.integer("classes", null, 2, 1_000_000, "Number of classes; chance-level loss is"
          + " ln(classes)."),
      Param.fraction("tolerance", 0.05, 0, true, 1, true, "Within this fraction of ln(classes)"
          + " counts as chance level."),
      Param.integer("by_step", 500, 0, Integer.MAX_VALUE, "Judge from this step on."))) {
    @Override
    public String explain(String s, Map<String, Object> p) {
      return s + " is still within " + pct(p, "tolerance") + " of chance level ln("
          + integer(p, "classes") + ") at step " + integer(p, "by_step");
    }

    @Override
    Detector build(String s, Map<String, Object> p) {
      int classes = integer(p, "classes");
      return new ChanceLevelDetector(s, classes, number(p, "tolerance") * Math.log(classes),
          integer(p, "by_step"), ChanceLevelDetector.DEFAULT_BETA);
    }
  };

  private final String key;
  private final String defaultSeries;
  private final boolean divergence;
  private final String doc;
  private final List<Param> params;

  DetectorKind(String key, String defaultSeries, boolean divergence, String doc,
      List<Param> params) {
    this.key = key;
    this.defaultSeries = defaultSeries;
    this.divergence = divergence;
    this.doc = doc;
    this.params = params;
  }

  /** The name in the guard file ({@code when: { rises: ... }}). */
  public String key() {
    return key;
  }

  public String defaultSeries() {
    return defaultSeries;
  }

  /** Whether its firing means the run is diverging rather than merely done. */
  public boolean divergence() {
    return divergence;
  }

  /** What it fires on, in a few plain words (for the schema). */
  public String doc() {
    return doc;
  }

  public List<Param> params() {
    return params;
  }

  public Param param(String name) {
    for (Param p : params) {
      if (p.name().equals(name)) {
        return p;
      }
    }
    throw new IllegalArgumentException(key + " has no parameter '" + name + "'");
  }

  /** The condition in the plain words of {@code check}, with the values filled in. */
  public abstract String explain(String series, Map<String, Object> params);

  /**
   * A rule between parameters that no single range expresses, in words, or empty when the
   * values fit together. The loader refuses a file for it, so the factory never meets it.
   */
  public Optional<String> conflict(Map<String, Object> params) {
    return Optional.empty();
  }

  /**
   * Builds the detector from values that passed the ranges of {@link #params()} and {@link
   * #conflict}; a parameter left out takes its default.
   */
  public Detector create(String series, Map<String, Object> params) {
    return build(series, params);
  }

  abstract Detector build(String series, Map<String, Object> params);

  /** The detector of that guard-file name. */
  public static Optional<DetectorKind> named(String key) {
    return Arrays.stream(values()).filter(k -> k.key.equals(key)).findFirst();
  }

  /** All guard-file names, in catalogue order. */
  public static List<String> keys() {
    return Arrays.stream(values()).map(DetectorKind::key).toList();
  }

  private Object value(Map<String, Object> p, String name) {
    Object v = p.get(name);
    return v != null ? v : param(name).defaultValue();
  }

  double number(Map<String, Object> p, String name) {
    return ((Number) value(p, name)).doubleValue();
  }

  int integer(Map<String, Object> p, String name) {
    return ((Number) value(p, name)).intValue();
  }

  String text(Map<String, Object> p, String name) {
    return (String) value(p, name);
  }

  String num(Map<String, Object> p, String name) {
    return Param.num(number(p, name));
  }

  String pct(Map<String, Object> p, String name) {
    return Param.num(number(p, name) * 100) + " %";
  }
}
