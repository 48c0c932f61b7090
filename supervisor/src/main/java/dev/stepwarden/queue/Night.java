package dev.stepwarden.queue;

import dev.stepwarden.audit.AuditLog;
import dev.stepwarden.process.Stops;
import dev.stepwarden.supervise.Supervisor;
import io.micrometer.core.instrument.MeterRegistry;
import java.io.IOException;
import java.io.PrintStream;
import java.nio.file.Path;
import java.time.Clock;
import java.util.ArrayList;
import java.util.List;
import java.util.Map;
import java.util.Set;
import java.util.concurrent.ConcurrentHashMap;
import java.util.concurrent.Executors;
import java.util.concurrent.ScheduledExecutorService;
import java.util.concurrent.TimeUnit;
import org.quartz.JobDataMap;
import org.quartz.JobDetail;
import org.quartz.JobKey;
import org.quartz.ObjectAlreadyExistsException;
import org.quartz.Scheduler;
import org.quartz.SchedulerException;
import org.quartz.impl.matchers.GroupMatcher;

/**
 * A serving queue: the started Quartz scheduler, its slots, and a one-second housekeeping tick
 * that releases jobs whose {@code --after} job ended and passes {@code queue cancel} on to the
 * runs of this process. Close it to stop: running jobs are interrupted (their trainers stopped
 * and audited) and given a fresh trigger, so the next serve resumes them.
 */
public final class Night implements AutoCloseable {
  /** How a job whose supervisor died is continued in its run directory; null when unavailable. */
  public interface Resumer {
    /** Continues the run in {@code runDir} in the foreground; returns its exit code. */
    int resume(Path runDir) throws Exception;

    /**
     * Stops (and audits) every run this resumer is continuing, as {@link #close()} does with
     * the runs it started itself; those return from {@link #resume} soon after.
     */
    void stopAll(String reason);
  }

  /**
   * @param gpus per slot the CUDA_VISIBLE_DEVICES value (null entries leave it alone)
   * @param registry meters for the runs, or null
   * @param resumer continues an unfinished run; null starts a new attempt directory instead
   * @param minCompleted the median rule needs this many completed runs of the study
   * @param minStep the median rule does not judge before this step
   * @param median use the median stopping rule for jobs that name a study
   */
  public record Options(List<String> gpus, MeterRegistry registry, Resumer resumer,
      PrintStream console, boolean median, String medianSeries, int minCompleted, long minStep) {
    public Options {
      gpus = gpus == null || gpus.isEmpty() ? java.util.Collections.singletonList(null)
          : new java.util.ArrayList<>(gpus);
      console = console == null ? System.err : console;
      medianSeries = medianSeries == null ? "validation" : medianSeries;
    }

    /** Slots from {@code --slots} and {@code --gpus} (see {@code serve --help}). */
    public static List<String> plan(Integer slots, List<String> gpus) throws QueueException {
      return Slots.plan(slots, gpus);
    }

    public static Options slots(int n) {
      return new Options(java.util.Collections.nCopies(n, null), null, null, null, true, null, 3,
          0);
    }
  }

  static final String CONTEXT_KEY = "stepwarden.night";

  final Queue queue;
  final Options options;
  final Slots slots;
  final Scheduler scheduler;
  final String node;
  final AuditLog log;
  final Map<String, Supervisor> running = new ConcurrentHashMap<>();
  final Set<String> cancelled = ConcurrentHashMap.newKeySet();
  volatile boolean stopping;
  private final ScheduledExecutorService tick;

  private Night(Queue queue, Options options, AuditLog log) throws SchedulerException {
    this.queue = queue;
    this.options = options;
    this.slots = new Slots(options.gpus());
    this.scheduler = queue.scheduler();
    this.node = scheduler.getSchedulerInstanceId();
    this.log = log;
    this.tick = Executors.newSingleThreadScheduledExecutor(r -> {
      Thread t = new Thread(r, "stepwarden-queue-tick");
      t.setDaemon(true);
      return t;
    });
  }

  static Night start(Queue queue, Options options) throws QueueException {
    try {
      AuditLog log = AuditLog.open(queue.settings().home().resolve("serve-audit.jsonl"),
          Clock.systemUTC());
      Night n = new Night(queue, options, log);
      n.scheduler.getContext().put(CONTEXT_KEY, n);
      n.audit("serve-start", Map.of("node", n.node, "slots", n.slots.size(),
          "runs", queue.settings().runs().toString()));
      n.releaseWaiting();
      n.scheduler.start();
      n.tick.scheduleWithFixedDelay(n::housekeeping, 1, 1, TimeUnit.SECONDS);
      return n;
    } catch (SchedulerException | IOException e) {
      throw new QueueException("cannot start serving the queue: " + e.getMessage(), e);
    }
  }

  /** The id of this node (Quartz's instance id: "local", or generated in a cluster). */
  public String node() {
    return node;
  }

  void audit(String type, Map<String, ?> fields) {
    try {
      log.append(type, fields);
    } catch (IOException e) {
      options.console().println("stepwarden: " + e.getMessage());
    }
  }

  void say(String message) {
    options.console().println("stepwarden serve: " + message);
  }

  private void housekeeping() {
    try {
      releaseWaiting();
      for (Map.Entry<String, Supervisor> e : running.entrySet()) {
        JobDetail d = scheduler.getJobDetail(JobKey.jobKey(e.getKey(), Queue.GROUP));
        if (d != null && "requested".equals(d.getJobDataMap().getString(Queue.K_CANCEL))
            && cancelled.add(e.getKey())) {
          audit("cancel", Map.of("job", e.getKey()));
          say("cancelling " + e.getKey());
          Thread t = new Thread(() -> e.getValue().interrupt("queue cancel"),
              "stepwarden-cancel");
          t.setDaemon(true);
          t.start();
        }
      }
    } catch (SchedulerException | RuntimeException e) {
      if (!stopping) {
        options.console().println("stepwarden serve: housekeeping: " + e.getMessage());
      }
    }
  }

  /** Gives a start trigger to every job whose --after job ended, and to interrupted ones. */
  void releaseWaiting() throws SchedulerException {
    for (JobKey k : scheduler.getJobKeys(GroupMatcher.jobGroupEquals(Queue.GROUP))) {
      JobDetail d = scheduler.getJobDetail(k);
      if (d == null) {
        continue;
      }
      JobDataMap m = d.getJobDataMap();
      if ("interrupted".equals(m.getString(Queue.K_STATUS))
          && scheduler.getTriggersOfJob(k).isEmpty()) {
        // stopped by a serve shutdown (SIGTERM) whose own re-trigger may not have reached the
        // store before the database closed: give it one now so it resumes
        try {
          scheduler.scheduleJob(Queue.trigger(k.getName(), "resume", null, null,
              Integer.parseInt(m.getString(Queue.K_PRIORITY))));
          audit("resume-interrupted", Map.of("job", k.getName()));
        } catch (ObjectAlreadyExistsException another) {
          // another node did it
        }
        continue;
      }
      if (!"after".equals(m.getString(Queue.K_STATUS))) {
        continue;
      }
      if (!queue.ended(m.getString(Queue.K_AFTER))) {
        continue;
      }
      try {
        scheduler.scheduleJob(Queue.trigger(k.getName(), "after", null, null,
            Integer.parseInt(m.getString(Queue.K_PRIORITY))));
      } catch (ObjectAlreadyExistsException another) {
        continue; // another node released it first
      }
      m.put(Queue.K_STATUS, "waiting");
      Queue.putSafely(scheduler, d);
      audit("released", Map.of("job", k.getName(), "after", m.getString(Queue.K_AFTER)));
    }
  }

  /** Jobs running in this process now. */
  public Set<String> runningHere() {
    return Set.copyOf(running.keySet());
  }

  /**
   * Stops serving: no new job starts, running ones are interrupted and re-triggered so the next
   * serve resumes them, then the scheduler shuts down.
   */
  @Override
  public void close() {
    stopping = true;
    tick.shutdownNow();
    try {
      scheduler.standby();
      for (String id : running.keySet()) {
        try {
          JobDetail d = scheduler.getJobDetail(JobKey.jobKey(id, Queue.GROUP));
          int prio = d == null ? 5 : Integer.parseInt(d.getJobDataMap().getString(
              Queue.K_PRIORITY));
          scheduler.scheduleJob(Queue.trigger(id, "resume-" + System.currentTimeMillis(), null,
              null, prio));
        } catch (SchedulerException e) {
          say("could not keep " + id + " for the next serve: " + e.getMessage());
        }
      }
      // All at once: one after the other, four slots would run past the stop bound.
      List<Runnable> stops = new ArrayList<>();
      for (Supervisor s : running.values()) {
        stops.add(() -> s.interrupt("serve stopping"));
      }
      if (options.resumer() != null) {
        stops.add(() -> options.resumer().stopAll("serve stopping"));
      }
      Stops.allAtOnce(stops);
      scheduler.shutdown(true);
    } catch (SchedulerException e) {
      say("stopping: " + e.getMessage());
    }
    audit("serve-stop", Map.of("node", node));
    try {
      log.close();
    } catch (IOException e) {
      say(e.getMessage());
    }
  }
}
