package dev.stepwarden.rules;

import dev.stepwarden.detectors.DetectorKind;
import dev.stepwarden.metrics.MetricPatterns;
import dev.stepwarden.metrics.Nearest;
import dev.stepwarden.metrics.ReadPlan;
import dev.stepwarden.rules.ConfigNode.ListNode;
import dev.stepwarden.rules.ConfigNode.MapNode;
import dev.stepwarden.rules.ConfigNode.Scalar;
import dev.stepwarden.rules.GuardFile.Action;
import java.nio.file.Files;
import java.nio.file.Path;
import java.time.Duration;
import java.util.ArrayList;
import java.util.Collection;
import java.util.HashSet;
import java.util.LinkedHashMap;
import java.util.List;
import java.util.Locale;
import java.util.Map;
import java.util.Optional;
import java.util.Set;
import java.util.regex.Matcher;
import java.util.regex.Pattern;

/**
 * Loads guard files strictly: every key is known, every value typed and in range, every refusal
 * names line:column and the fix. The accepted keys live in {@link Catalogue}.
 */
public final class GuardFiles {
  /** Placeholders the command template may use. */
  public static final Set<String> PLACEHOLDERS =
      Set.of("learning_rate", "resume_from", "skip_batches", "attempt", "run_dir");

  private static final Pattern PLACEHOLDER = Pattern.compile("\\{([^{}]*)}");
  private final Path file;

  private GuardFiles(Path file) {
    this.file = file;
  }

  /** Loads and validates a guard file; the command may be absent (it can come after --). */
  public static GuardFile load(Path file) throws ConfigException {
    GuardFiles loader = new GuardFiles(file);
    return loader.build(new YamlReader(file).read());
  }

  /** Loads from bytes already read (fuzzing, tests); {@code name} is used in messages. */
  public static GuardFile parse(byte[] yaml, Path name) throws ConfigException {
    return new GuardFiles(name).build(new YamlReader(name).read(yaml));
  }

  private GuardFile build(ConfigNode root) throws ConfigException {
    MapNode top = map(root, "the guard file");
    checkKeys(top, Catalogue.TOP, "the top level");
    MapNode runNode = requiredSection(top, "run");
    Map<String, Object> run = values(runNode, Catalogue.RUN, "run");
    List<String> command = stringList(runNode, "command");
    for (int i = 0; i < command.size(); i++) {
      checkPlaceholders(((ListNode) runNode.entries.get("command")).items.get(i), command.get(i));
    }
    String name = (String) run.get("name");
    if (name == null) {
      String f = file == null ? "run" : file.getFileName().toString();
      name = f.replaceFirst("\\.ya?ml$", "");
    }
    Path workdir = run.get("workdir") == null ? null : Path.of((String) run.get("workdir"));
    if (!command.isEmpty()) {
      checkProgram(((ListNode) runNode.entries.get("command")).items.get(0), command.get(0),
          workdir);
    }
    GuardFile.Run runSpec = new GuardFile.Run(name, command,
        (Double) run.get("learning_rate"), workdir, stringMap(runNode, "env"),
        (Duration) run.get("stop_grace"));

    ReadPlan read = read(section(top, "read"));
    GuardFile.Steer steer = steer(section(top, "steer"));
    Optional<GuardFile.Checkpoints> ckpt = checkpoints(top);
    GuardFile.Limits limits = limits(section(top, "limits"));
    if (runSpec.learningRate() < limits.minRate() || runSpec.learningRate() > limits.maxRate()) {
      ConfigNode at = runNode.entries.get("learning_rate");
      throw fail(at, "the starting learning_rate " + runSpec.learningRate()
          + " lies outside limits.learning_rate [" + limits.minRate() + ", " + limits.maxRate()
          + "]; move it inside or widen the limits");
    }
    List<GuardFile.Guard> guards = guards(top.entries.get("guards"), read);
    Optional<GuardFile.Probe> probe = probe(top, steer, read);
    Optional<String> unreachable = CommandCheck.rateUnreachable(command, steer);
    if (unreachable.isPresent()) {
      throw fail(runNode.entries.get("command"), unreachable.get());
    }
    return new GuardFile(file, runSpec, read, steer, ckpt, guards, limits, probe);
  }

  private ReadPlan read(MapNode node) throws ConfigException {
    Map<String, Object> v = values(node, Catalogue.READ, "read", "also");
    int lineLimit = (Integer) v.get("line_limit");
    List<ReadPlan> also = new ArrayList<>();
    ConfigNode alsoNode = node.entries.get("also");
    if (alsoNode != null && !(alsoNode instanceof Scalar s && s.type == Scalar.Type.NULL)) {
      if (!(alsoNode instanceof ListNode list)) {
        throw fail(alsoNode, "read.also must be a list of sources, e.g. also: [ { file: val.csv,"
            + " format: csv, series: { validation: val_loss } } ], not " + alsoNode.kind());
      }
      for (int i = 0; i < list.items.size(); i++) {
        String where = "read.also[" + (i + 1) + "]";
        MapNode m = map(list.items.get(i), where);
        Map<String, Object> av = values(m, Catalogue.READ_ALSO, where);
        if (stringMap(m, "series").isEmpty()) {
          throw fail(m, where + " needs 'series': which of the guard file's series this source"
              + " carries, e.g. series: { validation: val_loss }");
        }
        also.add(source(m, av, where, lineLimit, Map.of(), List.of()));
      }
    }
    Map<String, String> dflt = new LinkedHashMap<>();
    dflt.put("train", "loss");
    dflt.put("validation", "val_loss");
    if (!also.isEmpty() && stringMap(node, "series").isEmpty()) {
      dflt.keySet().removeIf(n -> also.stream().anyMatch(a -> a.series().containsKey(n)));
      if (dflt.isEmpty()) {
        throw fail(node, "read.series is missing and the default series both come from"
            + " read.also; give read.series for the main source");
      }
    }
    Set<String> names = new HashSet<>(stringMap(node, "series").isEmpty() ? dflt.keySet()
        : stringMap(node, "series").keySet());
    for (int i = 0; i < also.size(); i++) {
      for (String n : also.get(i).series().keySet()) {
        if (!names.add(n)) {
          ConfigNode at = ((ListNode) alsoNode).items.get(i);
          throw fail(at, "series '" + n + "' is read from two sources; each series comes from"
              + " one source: rename it in one of them");
        }
      }
    }
    return source(node, v, "read", lineLimit, dflt, also);
  }

  /** One source of a read section (the main one or an entry of read.also). */
  private ReadPlan source(MapNode node, Map<String, Object> v, String where, int lineLimit,
      Map<String, String> defaultSeries, List<ReadPlan> also) throws ConfigException {
    String fileName = (String) v.get("file");
    ReadPlan.Source source = fileName != null ? ReadPlan.Source.FILE
        : ReadPlan.Source.valueOf(((String) v.get("from")).toUpperCase(Locale.ROOT));
    ReadPlan.Format format = ReadPlan.Format.valueOf(
        ((String) v.get("format")).replace('-', '_').toUpperCase(Locale.ROOT));
    if (format == ReadPlan.Format.TFRECORD && fileName == null) {
      throw fail(node.entries.getOrDefault("format", node), "format: tfrecord reads an event"
          + " file: add 'file' with the file or the folder the summary writer writes to in "
          + where);
    }
    Pattern pattern = null;
    String patternText = (String) v.get("pattern");
    if (format == ReadPlan.Format.PATTERN) {
      if (patternText == null) {
        throw fail(node.entries.getOrDefault("format", node),
            "format: pattern needs a 'pattern' key with a regular expression in " + where);
      }
      try {
        pattern = MetricPatterns.compile(patternText);
      } catch (MetricPatterns.BadPattern e) {
        throw fail(node.entries.get("pattern"), e.getMessage());
      }
    } else if (patternText != null) {
      throw fail(node.entries.get("pattern"),
          "'pattern' is only used with format: pattern; remove it or set format: pattern");
    }
    Map<String, String> series = stringMap(node, "series");
    if (series.isEmpty()) {
      series = new LinkedHashMap<>(defaultSeries);
    }
    if (pattern != null) {
      List<String> groups = MetricPatterns.keys(pattern);
      for (Map.Entry<String, String> e : series.entrySet()) {
        if (!groups.contains(e.getValue())) {
          throw fail(node.entries.get("pattern"), "the pattern has no named group (?P<"
              + e.getValue() + ">...) for series '" + e.getKey() + "'; groups found: " + groups
              + GuardFiles.suggestion(e.getValue(), groups));
        }
      }
    }
    return new ReadPlan(source, fileName == null ? null : Path.of(fileName), format, pattern,
        (String) v.get("step"), (String) v.get("epoch"), (String) v.get("rate"), series,
        lineLimit, also);
  }

  private GuardFile.Steer steer(MapNode node) throws ConfigException {
    Map<String, Object> v = values(node, Catalogue.STEER, "steer");
    GuardFile.Steer.Method by = "restart".equals(v.get("by"))
        ? GuardFile.Steer.Method.RESTART : GuardFile.Steer.Method.CONTROL_FILE;
    return new GuardFile.Steer(by, (Duration) v.get("confirm_within"),
        "restart".equals(v.get("unconfirmed")));
  }

  private Optional<GuardFile.Checkpoints> checkpoints(MapNode top) throws ConfigException {
    ConfigNode raw = top.entries.get("checkpoints");
    if (raw == null) {
      return Optional.empty();
    }
    MapNode node = map(raw, "checkpoints");
    Map<String, Object> v = values(node, Catalogue.CHECKPOINTS, "checkpoints");
    String watch = (String) v.get("watch");
    String normalized = watch.replace('\\', '/');
    if (normalized.startsWith("/") || normalized.startsWith("~")
        || List.of(normalized.split("/")).contains("..")) {
      throw fail(node.entries.get("watch"), "the checkpoint glob '" + watch + "' leaves the"
          + " working directory; write it relative to workdir, without '..' or a leading '/'");
    }
    return Optional.of(new GuardFile.Checkpoints(watch, (Integer) v.get("keep")));
  }

  private Optional<GuardFile.Probe> probe(MapNode top, GuardFile.Steer steer, ReadPlan read)
      throws ConfigException {
    ConfigNode raw = top.entries.get("probe");
    if (raw == null || (raw instanceof Scalar s && s.type == Scalar.Type.NULL)) {
      return Optional.empty();
    }
    MapNode node = map(raw, "probe");
    Map<String, Object> v = values(node, Catalogue.PROBE, "probe");
    double from = (Double) v.get("from");
    double to = (Double) v.get("to");
    if (from >= to) {
      throw fail(node, "probe.from " + from + " is not below probe.to " + to
          + "; the range test raises the rate, so give from < to");
    }
    if (steer.by() != GuardFile.Steer.Method.CONTROL_FILE) {
      throw fail(node, "the probe ramps the rate through the control file; set steer.by:"
          + " control-file or remove the probe section");
    }
    if (!read.allSeries().containsKey("train")) {
      throw fail(node, "the probe reads the 'train' series; name it in read.series");
    }
    return Optional.of(new GuardFile.Probe(from, to, (Integer) v.get("steps"),
        (Integer) v.get("hold"), (Double) v.get("pick"), (Integer) v.get("branch")));
  }

  private GuardFile.Limits limits(MapNode node) throws ConfigException {
    List<Key> keys = new ArrayList<>(Catalogue.LIMITS);
    Map<String, Object> v = values(node, keys, "limits", "learning_rate");
    MapNode rateNode = section(node, "learning_rate");
    Map<String, Object> r = values(rateNode, Catalogue.RATE_LIMITS, "limits.learning_rate");
    double min = (Double) r.get("min");
    double max = (Double) r.get("max");
    if (min >= max) {
      throw fail(rateNode, "limits.learning_rate has min " + min + " >= max " + max
          + "; the floor must lie below the ceiling");
    }
    return new GuardFile.Limits(min, max, (Integer) v.get("rewinds"),
        (Integer) v.get("crash_restarts"), (Duration) v.get("silence"),
        (Duration) v.get("crash_backoff"), (Duration) v.get("first_metric"));
  }

  private List<GuardFile.Guard> guards(ConfigNode raw, ReadPlan read) throws ConfigException {
    if (raw == null || (raw instanceof Scalar s && s.type == Scalar.Type.NULL)) {
      return List.of();
    }
    if (!(raw instanceof ListNode list)) {
      throw fail(raw, "'guards' must be a list of guards (each item starting with '- name:'),"
          + " not " + raw.kind());
    }
    List<GuardFile.Guard> out = new ArrayList<>();
    Map<String, Integer> seen = new LinkedHashMap<>();
    for (ConfigNode item : list.items) {
      MapNode g = map(item, "a guard");
      Map<String, Object> v = values(g, Catalogue.GUARD, "a guard", "when", "do");
      String name = (String) v.get("name");
      if (seen.containsKey(name)) {
        throw fail(g.entries.get("name"), "two guards are named '" + name + "' (the first at line "
            + seen.get(name) + "); give each guard its own name");
      }
      seen.put(name, g.line);
      ConfigNode when = g.entries.get("when");
      if (when == null) {
        throw fail(g, "guard '" + name + "' has no 'when'; say which detector it uses, e.g."
            + " when: { flattens: { series: validation } }");
      }
      GuardFile.Condition cond = condition(when, name, read);
      ConfigNode doNode = g.entries.get("do");
      if (doNode == null) {
        throw fail(g, "guard '" + name + "' has no 'do'; say what it does, e.g. do: { scale: 0.5 }");
      }
      out.add(new GuardFile.Guard(name, cond, actions(doNode, name),
          (Integer) v.get("then_wait")));
    }
    return out;
  }

  private GuardFile.Condition condition(ConfigNode when, String guard, ReadPlan read)
      throws ConfigException {
    MapNode m = map(when, "'when' of guard '" + guard + "'");
    if (m.entries.size() != 1) {
      throw fail(m, "'when' of guard '" + guard + "' must name exactly one detector, one of "
          + DetectorKind.keys() + "; it names " + m.entries.size());
    }
    String detector = m.entries.keySet().iterator().next();
    DetectorKind kind = DetectorKind.named(detector).orElse(null);
    if (kind == null) {
      int[] at = m.keyPositions.get(detector);
      throw new ConfigException(file, at[0], at[1], "unknown detector '" + detector
          + "' in guard '" + guard + "'" + suggestion(detector, DetectorKind.keys())
          + "; known detectors: " + DetectorKind.keys());
    }
    ConfigNode paramsNode = m.entries.get(detector);
    MapNode params = paramsNode instanceof Scalar s && s.type == Scalar.Type.NULL
        ? new MapNode(s.line, s.column, new LinkedHashMap<>(), new LinkedHashMap<>())
        : map(paramsNode, "the parameters of '" + detector + "'");
    Map<String, Object> v = values(params, Catalogue.detectorKeys(kind), guard + "." + detector);
    String series = (String) v.remove("series");
    if (!read.allSeries().containsKey(series)) {
      ConfigNode at = params.entries.getOrDefault("series", params);
      throw fail(at, "guard '" + guard + "' watches series '" + series + "', but read.series"
          + " names only " + read.allSeries().keySet()
          + suggestion(series, read.allSeries().keySet())
          + "; add it under read.series or pick one of those");
    }
    if (detector.equals("overfits") && !(read.allSeries().containsKey("train")
        && read.allSeries().containsKey("validation"))) {
      throw fail(m, "'overfits' compares the train and validation series; read.series must"
          + " name both");
    }
    Optional<String> conflict = kind.conflict(v);
    if (conflict.isPresent()) {
      throw fail(params, guard + "." + detector + ": " + conflict.get());
    }
    return new GuardFile.Condition(detector, series, v);
  }

  private List<Action> actions(ConfigNode node, String guard) throws ConfigException {
    List<ConfigNode> items = node instanceof ListNode l ? l.items : List.of(node);
    if (items.isEmpty()) {
      throw fail(node, "guard '" + guard + "' has an empty 'do'; name at least one action of "
          + Catalogue.ACTIONS);
    }
    List<Action> out = new ArrayList<>();
    boolean rate = false;
    boolean terminal = false;
    for (ConfigNode item : items) {
      Action a = action(item, guard);
      boolean isRate = a instanceof Action.Scale || a instanceof Action.SetRate;
      boolean isTerminal = a instanceof Action.Stop || a instanceof Action.GiveUp;
      if (isRate && rate) {
        throw fail(item, "guard '" + guard + "' changes the rate twice; keep one of scale or"
            + " set_rate");
      }
      if ((isTerminal && !out.isEmpty()) || (terminal && !isTerminal) || (terminal && isTerminal)) {
        throw fail(item, "guard '" + guard + "' combines stop or give_up with other actions;"
            + " a run that ends needs no other action");
      }
      rate |= isRate;
      terminal |= isTerminal;
      if (out.stream().anyMatch(x -> x.getClass() == a.getClass())) {
        throw fail(item, "guard '" + guard + "' names the same action twice");
      }
      out.add(a);
    }
    return out;
  }

  private Action action(ConfigNode item, String guard) throws ConfigException {
    if (item instanceof Scalar s && s.type == Scalar.Type.STRING) {
      switch (s.text) {
        case "rewind": return new Action.Rewind(0);
        case "stop": return new Action.Stop();
        case "give_up": return new Action.GiveUp();
        case "scale":
        case "set_rate":
          throw fail(s, "'" + s.text + "' needs a value, e.g. { " + s.text + ": 0.5 }");
        default:
          throw fail(s, "unknown action '" + s.text + "' in guard '" + guard + "'"
              + suggestion(s.text, Catalogue.ACTIONS) + "; actions: " + Catalogue.ACTIONS);
      }
    }
    MapNode m = map(item, "an action of guard '" + guard + "'");
    if (m.entries.size() != 1) {
      throw fail(m, "write one action per item, e.g. do: [ rewind, { scale: 0.5 } ]");
    }
    String name = m.entries.keySet().iterator().next();
    ConfigNode value = m.entries.get(name);
    switch (name) {
      case "scale": {
        double f = (Double) convert(Key.factor("scale", null, 1e-6, 1e6, ""), value, "scale");
        if (f == 1.0) {
          throw fail(value, "scale: 1 changes nothing; use a factor below 1 to lower the rate"
              + " or above 1 to raise it");
        }
        return new Action.Scale(f);
      }
      case "set_rate":
        return new Action.SetRate(
            (Double) convert(Key.number("set_rate", null, Double.MIN_NORMAL, 1e6, ""), value,
                "set_rate"));
      case "rewind": {
        MapNode r = map(value, "rewind");
        Map<String, Object> v = values(r, List.of(Key.integer("skip_batches", 0, 0,
            Integer.MAX_VALUE, "Batches to skip after the rewind.")), "rewind");
        return new Action.Rewind((Integer) v.get("skip_batches"));
      }
      default: {
        int[] at = m.keyPositions.get(name);
        throw new ConfigException(file, at[0], at[1], "unknown action '" + name + "' in guard '"
            + guard + "'" + suggestion(name, Catalogue.ACTIONS) + "; actions: "
            + Catalogue.ACTIONS);
      }
    }
  }

  // ---- generic helpers -------------------------------------------------------------------

  private MapNode section(MapNode parent, String name) throws ConfigException {
    ConfigNode n = parent.entries.get(name);
    if (n == null || (n instanceof Scalar s && s.type == Scalar.Type.NULL)) {
      int line = n == null ? parent.line : n.line;
      int col = n == null ? parent.column : n.column;
      return new MapNode(line, col, new LinkedHashMap<>(), new LinkedHashMap<>());
    }
    return map(n, "'" + name + "'");
  }

  private MapNode requiredSection(MapNode parent, String name) throws ConfigException {
    if (!parent.entries.containsKey(name)) {
      throw fail(parent, "the '" + name + "' section is missing; at least 'run: {"
          + " learning_rate: ... }' is needed");
    }
    return section(parent, name);
  }

  private MapNode map(ConfigNode n, String what) throws ConfigException {
    if (n instanceof MapNode m) {
      return m;
    }
    throw fail(n, what + " must be a mapping of keys to values, not " + n.kind());
  }

  /** Checks the keys of {@code m} against {@code keys} (+ {@code nested} sections) and converts. */
  private Map<String, Object> values(MapNode m, List<Key> keys, String where, String... nested)
      throws ConfigException {
    List<String> allowed = new ArrayList<>();
    keys.forEach(k -> allowed.add(k.name()));
    allowed.addAll(List.of(nested));
    checkKeys(m, allowed, where);
    Map<String, Object> out = new LinkedHashMap<>();
    for (Key k : keys) {
      ConfigNode n = m.entries.get(k.name());
      if (n == null || (n instanceof Scalar s && s.type == Scalar.Type.NULL)) {
        if (k.required()) {
          throw fail(n == null ? m : n, where + " needs '" + k.name() + "': " + k.doc());
        }
        Object d = k.defaultValue();
        if (d != null) {
          out.put(k.name(), k.kind() == Key.Kind.DURATION ? parseDuration(m, d.toString(), k) : d);
        } else {
          out.put(k.name(), null);
        }
        continue;
      }
      if (k.kind() == Key.Kind.STRING_LIST || k.kind() == Key.Kind.STRING_MAP) {
        continue; // read by stringList / stringMap
      }
      out.put(k.name(), convert(k, n, where + "." + k.name()));
    }
    return out;
  }

  private void checkKeys(MapNode m, Collection<String> allowed, String where)
      throws ConfigException {
    for (Map.Entry<String, int[]> e : m.keyPositions.entrySet()) {
      if (!allowed.contains(e.getKey())) {
        throw new ConfigException(file, e.getValue()[0], e.getValue()[1], "unknown key '"
            + e.getKey() + "' in " + where + suggestion(e.getKey(), allowed) + "; accepted keys: "
            + String.join(", ", allowed));
      }
    }
  }

  private Object convert(Key k, ConfigNode n, String where) throws ConfigException {
    if (!(n instanceof Scalar s)) {
      throw fail(n, where + " must be a single value, not " + n.kind());
    }
    String text = s.text;
    switch (k.kind()) {
      case STRING:
        if (s.type != Scalar.Type.STRING && s.type != Scalar.Type.NUMBER) {
          throw fail(s, where + " must be text, not " + s.kind());
        }
        if (text.isBlank()) {
          throw fail(s, where + " must not be blank");
        }
        return text;
      case CHOICE:
        if (!k.choices().contains(text)) {
          throw fail(s, where + " must be one of " + k.choices() + ", not '" + text + "'"
              + suggestion(text, k.choices()));
        }
        return text;
      case INTEGER: {
        if (s.type != Scalar.Type.NUMBER) {
          throw fail(s, where + " must be a whole number, not " + s.kind());
        }
        long value;
        try {
          value = Long.parseLong(text.replace("_", ""));
        } catch (NumberFormatException e) {
          throw fail(s, where + " must be a whole number, not " + text);
        }
        if (!k.accepts(value)) {
          throw fail(s, where + " is " + value + "; it must lie " + k.range());
        }
        return (int) value;
      }
      case NUMBER:
        return ranged(k, s, number(s, text, where), where);
      case FACTOR: {
        String t = text;
        if (s.type == Scalar.Type.STRING && t.endsWith("x")) {
          t = t.substring(0, t.length() - 1).trim();
        }
        return ranged(k, s, number(s, t, where), where);
      }
      case FRACTION: {
        double value;
        if (s.type == Scalar.Type.STRING && text.trim().endsWith("%")) {
          value = number(s, text.trim().substring(0, text.trim().length() - 1).trim(), where)
              / 100.0;
        } else {
          value = number(s, text, where);
        }
        return ranged(k, s, value, where);
      }
      case DURATION:
        return parseDuration(s, text, k);
      default:
        throw new IllegalStateException("unhandled key kind " + k.kind());
    }
  }

  private double number(Scalar s, String text, String where) throws ConfigException {
    if (s.type == Scalar.Type.BOOLEAN || s.type == Scalar.Type.NULL) {
      throw fail(s, where + " must be a number, not " + s.kind());
    }
    try {
      double v = Double.parseDouble(text.trim().replace("_", ""));
      if (!Double.isFinite(v)) {
        throw fail(s, where + " must be a finite number, not " + text);
      }
      return v;
    } catch (NumberFormatException e) {
      throw fail(s, where + " must be a number, not '" + text + "'");
    }
  }

  private Double ranged(Key k, Scalar s, double v, String where) throws ConfigException {
    if (!k.accepts(v)) {
      throw fail(s, where + " is " + s.text + "; it must lie " + k.range());
    }
    return v;
  }

  private Duration parseDuration(ConfigNode at, String text, Key k) throws ConfigException {
    try {
      return Durations.parse(text);
    } catch (IllegalArgumentException e) {
      throw fail(at, k.name() + " " + e.getMessage());
    }
  }


  private List<String> stringList(MapNode parent, String key) throws ConfigException {
    ConfigNode n = parent.entries.get(key);
    if (n == null || (n instanceof Scalar s && s.type == Scalar.Type.NULL)) {
      return List.of();
    }
    if (!(n instanceof ListNode list)) {
      throw fail(n, key + " must be a list of words, e.g. [python3, train.py, --lr,"
          + " \"{learning_rate}\"], not " + n.kind() + " (the command is never run through a"
          + " shell)");
    }
    List<String> out = new ArrayList<>();
    for (ConfigNode item : list.items) {
      if (!(item instanceof Scalar s) || s.type == Scalar.Type.NULL) {
        throw fail(item, "each word of " + key + " must be text, not " + item.kind());
      }
      out.add(s.text);
    }
    if (out.isEmpty()) {
      throw fail(n, key + " is an empty list; name the program to run");
    }
    return out;
  }

  private Map<String, String> stringMap(MapNode parent, String key) throws ConfigException {
    ConfigNode n = parent.entries.get(key);
    Map<String, String> out = new LinkedHashMap<>();
    if (n == null || (n instanceof Scalar s && s.type == Scalar.Type.NULL)) {
      return out;
    }
    MapNode m = map(n, key);
    for (Map.Entry<String, ConfigNode> e : m.entries.entrySet()) {
      if (!(e.getValue() instanceof Scalar s) || s.type == Scalar.Type.NULL) {
        throw fail(e.getValue(), key + "." + e.getKey() + " must be text, not "
            + e.getValue().kind());
      }
      out.put(e.getKey(), s.text);
    }
    return out;
  }

  /** Refuses a program that cannot be found, before the night starts rather than at 2 a.m. */
  private void checkProgram(ConfigNode at, String program, Path workdir) throws ConfigException {
    if (program.contains("{")) {
      return;
    }
    if (program.contains("/")) {
      Path p = Path.of(program);
      if (!p.isAbsolute()) {
        p = (workdir == null ? Path.of("") : workdir).resolve(p);
      }
      if (!Files.isRegularFile(p) || !Files.isExecutable(p)) {
        throw fail(at, "the program '" + program + "' does not exist or is not executable"
            + " (looked at " + p.toAbsolutePath() + "); fix the path or chmod +x it");
      }
      return;
    }
    String path = System.getenv("PATH");
    if (path != null) {
      for (String d : path.split(java.io.File.pathSeparator)) {
        if (!d.isEmpty() && Files.isExecutable(Path.of(d, program))) {
          return;
        }
      }
    }
    throw fail(at, "the program '" + program + "' is not on the PATH; install it, or give its"
        + " full path");
  }

  private void checkPlaceholders(ConfigNode at, String word) throws ConfigException {
    Matcher m = PLACEHOLDER.matcher(word);
    while (m.find()) {
      if (!PLACEHOLDERS.contains(m.group(1))) {
        throw fail(at, "unknown placeholder {" + m.group(1) + "} in the command"
            + suggestion(m.group(1), PLACEHOLDERS) + "; placeholders: " + PLACEHOLDERS);
      }
    }
  }

  private ConfigException fail(ConfigNode at, String problem) {
    return new ConfigException(file, at == null ? 1 : at.line, at == null ? 1 : at.column,
        problem);
  }

  /** "; did you mean 'x'?" when a known word is near ({@link Nearest}); never the word itself. */
  static String suggestion(String given, Collection<String> known) {
    return Nearest.of(given, known).map(k -> "; did you mean '" + k + "'?").orElse("");
  }

  static int editDistance(String a, String b) {
    return Nearest.distance(a, b);
  }
}
