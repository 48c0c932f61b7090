package dev.stepwarden.telemetry;

import dev.stepwarden.metrics.Sample;
import dev.stepwarden.engine.Decision;
import dev.stepwarden.rules.GuardFile;
import dev.stepwarden.supervise.RunObserver;
import dev.stepwarden.supervise.Supervisor;
import io.micrometer.core.instrument.Counter;
import io.micrometer.core.instrument.FunctionCounter;
import io.micrometer.core.instrument.Gauge;
import io.micrometer.core.instrument.Meter;
import io.micrometer.core.instrument.MeterRegistry;
import io.micrometer.core.instrument.Tags;
import java.time.Clock;
import java.util.List;
import java.util.Locale;
import java.util.Map;
import java.util.concurrent.ConcurrentHashMap;
import java.util.concurrent.CopyOnWriteArrayList;
import java.util.concurrent.atomic.AtomicLong;

/**
 * Publishes one supervised run as Micrometer meters, all tagged {@code run=NAME}.
 *
 * <p>Design: Micrometer gauges hold their state object only weakly, so a gauge whose state is
 * collected silently reports NaN. Every state object here (the rate, each series' last value, the
 * line counters, the time of the last metric) lives in a field of this object, and the caller
 * keeps this object for the life of the run. Every meter registered is remembered and removed in
 * {@link #onEnd}, so a finished run leaves nothing behind in a long-lived {@code serve} registry.
 * Hooks run on pump threads: they only store numbers.
 *
 * <p>Meters (Prometheus names): {@code stepwarden_learning_rate}, {@code stepwarden_series_last
 * {series}}, {@code stepwarden_interventions_total{guard,action}} (one per decision, its actions
 * joined by {@code +}: the report's count), {@code
 * stepwarden_rewinds_total}, {@code stepwarden_restarts_total}, {@code stepwarden_lines_read_total},
 * {@code stepwarden_lines_ignored_total}, {@code stepwarden_last_metric_timestamp_seconds} (when
 * the trainer last printed a metric, or was launched: a timestamp in seconds, so that the age is
 * {@code time() - stepwarden_last_metric_timestamp_seconds} in the query and the page itself
 * does not change between scrapes of an idle run; Prometheus's naming practice for times).
 */
public final class RunMeters implements RunObserver {
  private final MeterRegistry registry;
  private final Tags tags;
  private final Clock clock;
  private final List<Meter> meters = new CopyOnWriteArrayList<>();

  // Strong references behind the gauges and function counters (see the class note).
  private final Value rate = new Value();
  private final Map<String, Value> lastValues = new ConcurrentHashMap<>();
  private final Map<String, Counter> interventions = new ConcurrentHashMap<>();
  private final AtomicLong linesRead = new AtomicLong();
  private final AtomicLong linesIgnored = new AtomicLong();
  private final AtomicLong lastMetricMillis;
  private final Counter rewinds;
  private final Counter restarts;
  private volatile boolean ended;

  /** A mutable double a gauge can read. */
  static final class Value {
    volatile double v = Double.NaN;

    double get() {
      return v;
    }
  }

  /**
   * @param run the run's name, used as the {@code run} tag (queued jobs pass their job id)
   * @param startRate the rate before the first sample (the guard file's starting rate)
   */
  public RunMeters(MeterRegistry registry, String run, double startRate, Clock clock) {
    this.registry = registry;
    this.tags = Tags.of("run", run);
    this.clock = clock == null ? Clock.systemUTC() : clock;
    this.lastMetricMillis = new AtomicLong(this.clock.millis());
    rate.v = startRate;
    keep(Gauge.builder("stepwarden.learning.rate", rate, Value::get).tags(tags)
        .description("The learning rate in force").register(registry));
    keep(Gauge.builder("stepwarden.last.metric.timestamp", lastMetricMillis,
            ms -> ms.get() / 1000.0).baseUnit("seconds")
        .tags(tags).description("When the trainer last printed a metric (or was launched), in"
            + " seconds since the Unix epoch").register(registry));
    keep(FunctionCounter.builder("stepwarden.lines.read", linesRead, AtomicLong::doubleValue)
        .tags(tags).description("Trainer output lines read").register(registry));
    keep(FunctionCounter.builder("stepwarden.lines.ignored", linesIgnored,
            AtomicLong::doubleValue)
        .tags(tags).description("Lines read that carried no metric").register(registry));
    rewinds = keep(Counter.builder("stepwarden.rewinds").tags(tags)
        .description("Restarts from an earlier checkpoint").register(registry));
    restarts = keep(Counter.builder("stepwarden.restarts").tags(tags)
        .description("Relaunches of the trainer (rewinds, crashes, hangs)").register(registry));
  }

  /** The same meters for a guard file's run (name and starting rate from the file). */
  public static RunMeters of(MeterRegistry registry, GuardFile rules, Clock clock) {
    return new RunMeters(registry, rules.run().name(), rules.run().learningRate(), clock);
  }

  private <M extends Meter> M keep(M meter) {
    meters.add(meter);
    return meter;
  }

  @Override
  public void onSample(Sample sample, double newRate) {
    if (ended) {
      return;
    }
    rate.v = newRate;
    lastMetricMillis.set(clock.millis());
    for (Map.Entry<String, Double> e : sample.values().entrySet()) {
      lastValues.computeIfAbsent(e.getKey(), this::seriesGauge).v = e.getValue();
    }
  }

  private Value seriesGauge(String series) {
    Value holder = new Value();
    keep(Gauge.builder("stepwarden.series.last", holder, Value::get)
        .tags(tags.and("series", series)).description("The last value of a series")
        .register(registry));
    return holder;
  }

  @Override
  public void onDecision(Decision d) {
    if (ended) {
      return;
    }
    rate.v = d.rateAfter();
    // one decision is one intervention, as in the report: a rewind with a scale counts once,
    // under action="rewind+scale"
    StringBuilder b = new StringBuilder();
    for (GuardFile.Action a : d.actions()) {
      b.append(b.length() == 0 ? "" : "+").append(actionName(a));
    }
    String action = b.toString();
    interventions.computeIfAbsent(d.guard() + "\u0000" + action, k -> keep(
        Counter.builder("stepwarden.interventions").tags(tags.and("guard", d.guard(),
            "action", action)).description("Guard interventions (one per decision)")
            .register(registry))).increment();
  }

  static String actionName(GuardFile.Action a) {
    // set_rate rather than SetRate: the same spelling users write in the guard file
    return a.getClass().getSimpleName().replaceAll("([a-z])([A-Z])", "$1_$2")
        .toLowerCase(Locale.ROOT);
  }

  @Override
  public void onLaunch(int attempt, String reason) {
    if (ended) {
      return;
    }
    lastMetricMillis.set(clock.millis());
    if (attempt > 1) {
      restarts.increment();
      if ("rewind".equals(reason)) {
        rewinds.increment();
      }
    }
  }

  @Override
  public void onLines(long lines, long metricLines, long ignored) {
    linesRead.set(lines);
    linesIgnored.set(ignored);
  }

  @Override
  public void onEnd(Supervisor.Result result) {
    close();
  }

  /** Removes every meter of this run from the registry (idempotent). */
  public void close() {
    ended = true;
    for (Meter m : meters) {
      registry.remove(m);
    }
    meters.clear();
  }

  /** How many meters this run has in the registry now (0 once it ended). */
  int meterCount() {
    return meters.size();
  }
}
