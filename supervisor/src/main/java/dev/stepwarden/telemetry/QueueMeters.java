package dev.stepwarden.telemetry;

import io.micrometer.core.instrument.Gauge;
import io.micrometer.core.instrument.Meter;
import io.micrometer.core.instrument.MeterRegistry;
import java.util.List;
import java.util.Map;
import java.util.concurrent.ConcurrentHashMap;
import java.util.concurrent.CopyOnWriteArrayList;
import java.util.function.IntSupplier;
import java.util.function.LongSupplier;
import java.util.function.Supplier;

/**
 * The queue as a {@code serve} sees it, beside the meters of its runs: {@code
 * stepwarden_queue_jobs{state}} (every job of the queue by its state), {@code
 * stepwarden_queue_slots} and {@code stepwarden_queue_slots_busy} (this node's), and {@code
 * stepwarden_queue_last_job_end_timestamp_seconds} (when a job last ended on this node; absent
 * until one has). Counting jobs reads the queue, so the count is kept for a few seconds: a scrape
 * every second costs one read every {@link #COUNT_TTL_MS} ms.
 */
public final class QueueMeters implements AutoCloseable {
  static final long COUNT_TTL_MS = 5_000;
  /** States a gauge exists for from the start, so a dashboard sees zeros rather than gaps. */
  static final List<String> STATES = List.of("waiting", "after", "running", "done", "cancelled",
      "interrupted", "failed", "median-stopped");

  private final MeterRegistry registry;
  private final Supplier<Map<String, Integer>> counter;
  private final LongSupplier lastEndMillis;
  private final List<Meter> meters = new CopyOnWriteArrayList<>();
  private final Map<String, Boolean> known = new ConcurrentHashMap<>();
  private volatile Map<String, Integer> counts = Map.of();
  private volatile long countedAt;

  /**
   * @param countByState the number of jobs in each state (read at most every few seconds)
   * @param busy this node's busy slots now
   * @param lastEndMillis when a job last ended here (epoch ms), 0 when none has yet
   */
  public QueueMeters(MeterRegistry registry, Supplier<Map<String, Integer>> countByState,
      IntSupplier busy, int slots, LongSupplier lastEndMillis) {
    this.registry = registry;
    this.counter = countByState;
    this.lastEndMillis = lastEndMillis;
    STATES.forEach(this::stateGauge);
    meters.add(Gauge.builder("stepwarden.queue.slots", () -> slots)
        .description("Slots of this serve").register(registry));
    meters.add(Gauge.builder("stepwarden.queue.slots.busy", busy::getAsInt)
        .description("Slots of this serve running a job now").register(registry));
    meters.add(Gauge.builder("stepwarden.queue.last.job.end.timestamp", this,
            m -> m.lastEndMillis.getAsLong() == 0 ? Double.NaN
                : m.lastEndMillis.getAsLong() / 1000.0).baseUnit("seconds")
        .description("When a job last ended on this serve, in seconds since the Unix epoch")
        .register(registry));
  }

  private void stateGauge(String state) {
    if (known.putIfAbsent(state, Boolean.TRUE) == null) {
      meters.add(Gauge.builder("stepwarden.queue.jobs", this, m -> m.count(state))
          .tag("state", state).description("Jobs of the queue in this state")
          .register(registry));
    }
  }

  private double count(String state) {
    long now = System.currentTimeMillis();
    if (now - countedAt > COUNT_TTL_MS) {
      counts = counter.get();
      countedAt = now;
    }
    return counts.getOrDefault(state, 0);
  }

  @Override
  public void close() {
    meters.forEach(registry::remove);
    meters.clear();
  }
}
