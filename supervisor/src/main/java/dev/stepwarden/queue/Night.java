package dev.stepwarden.queue;

import dev.stepwarden.audit.AuditLog;
import dev.stepwarden.process.Stops;
import dev.stepwarden.supervise.Supervisor;
import dev.stepwarden.telemetry.QueueMeters;
import io.micrometer.core.instrument.MeterRegistry;
import java.io.IOException;
import java.io.PrintStream;
import java.time.Clock;
import java.time.Duration;
import java.time.Instant;
import java.util.ArrayList;
import java.util.Collections;
import java.util.LinkedHashMap;
import java.util.List;
import java.util.Map;
import java.util.Set;
import java.util.concurrent.ConcurrentHashMap;
import java.util.concurrent.Executors;
import java.util.concurrent.ScheduledExecutorService;
import java.util.concurrent.TimeUnit;
import java.util.concurrent.atomic.AtomicLong;
import org.quartz.JobDataMap;
import org.quartz.JobDetail;
import org.quartz.JobKey;
import org.quartz.ObjectAlreadyExistsException;
import org.quartz.Scheduler;
import org.quartz.SchedulerException;
import org.quartz.SimpleTrigger;
import org.quartz.Trigger;
import org.quartz.TriggerKey;
import org.quartz.impl.matchers.GroupMatcher;

/**
 * A serving queue: the started Quartz scheduler, its slots, and a one-second housekeeping tick.
 * The tick answers the commands of the request folder (embedded store), passes {@code queue
 * cancel} on to the runs of this process, fences this node in a cluster ({@link Fence}), and,
 * while every slot is busy, gives an {@code --at} job whose time has come its place among the
 * due jobs. None of it reads the whole job history: {@code --after} jobs are released when the
 * job they wait for ends (and once at start-up), and history is forgotten after {@code
 * keepHistory}. Close it to stop: running jobs are interrupted (their trainers stopped and
 * audited) and given a fresh trigger, so the next serve resumes them.
 */
public final class Night implements AutoCloseable {
  /**
   * @param gpus per slot the CUDA_VISIBLE_DEVICES value (null entries leave it alone)
   * @param registry meters for the runs and the queue, or null
   * @param median use the median stopping rule for jobs that name a cohort
   * @param medianSeries the series the median rule compares (lower is better)
   * @param quorum the median rule needs this many completed runs of the cohort reporting
   * @param fromStep the median rule does not judge before this step
   * @param keepHistory ended jobs are forgotten this long after they ended; null keeps them
   */
  public record Options(List<String> gpus, MeterRegistry registry, PrintStream console,
      boolean median, String medianSeries, int quorum, long fromStep, Duration keepHistory) {
    public Options {
      gpus = gpus == null || gpus.isEmpty() ? Collections.singletonList(null)
          : new ArrayList<>(gpus);
      console = console == null ? System.err : console;
      medianSeries = medianSeries == null ? "validation" : medianSeries;
    }

    /** Slots from {@code --slots} and {@code --gpus} (see {@code serve --help}). */
    public static List<String> plan(Integer slots, List<String> gpus) throws QueueException {
      return Slots.plan(slots, gpus);
    }

    public static Options slots(int n) {
      return new Options(Collections.nCopies(n, null), null, null, true, null, 3, 0, null);
    }
  }

  static final String CONTEXT_KEY = "stepwarden.night";
  private static final long PURGE_EVERY_MS = 3_600_000;

  /** A job this node has taken on: its supervisor once launched, and whether it was fenced. */
  static final class Active {
    volatile Supervisor supervisor;
    volatile String fenced;
  }

  final Queue queue;
  final Options options;
  final Slots slots;
  final Scheduler scheduler;
  final String node;
  final AuditLog log;
  final Map<String, Active> active = new ConcurrentHashMap<>();
  final Set<String> cancelled = ConcurrentHashMap.newKeySet();
  final AtomicLong lastJobEndMillis = new AtomicLong();
  volatile boolean stopping;
  private final Fence fence;
  private final ScheduledExecutorService tick;
  private QueueMeters meters;
  private long lastPurge;

  private Night(Queue queue, Options options, AuditLog log) throws SchedulerException {
    this.queue = queue;
    this.options = options;
    this.slots = new Slots(options.gpus());
    this.scheduler = queue.scheduler();
    this.node = scheduler.getSchedulerInstanceId();
    this.log = log;
    this.fence = queue.settings().clustered() ? new Fence(queue.settings(), node) : null;
    this.tick = Executors.newSingleThreadScheduledExecutor(r -> {
      Thread t = new Thread(r, "stepwarden-queue-tick");
      t.setDaemon(true);
      return t;
    });
  }

  static Night start(Queue queue, Options options) throws QueueException {
    try {
      AuditLog log = AuditLog.open(Home.privateFile(queue.settings().home()
          .resolve(Home.SERVE_AUDIT)), Clock.systemUTC());
      Night n = new Night(queue, options, log);
      n.scheduler.getContext().put(CONTEXT_KEY, n);
      n.audit("serve-start", Map.of("node", n.node, "slots", n.slots.size(),
          "runs", queue.settings().runs().toString()));
      n.purgeHistory();
      n.releaseAtStart();
      if (options.registry() != null) {
        n.meters = new QueueMeters(options.registry(), n::countByState, n::busySlots,
            n.slots.size(), n.lastJobEndMillis::get);
      }
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
      if (queue.settings().jdbcUrl() == null) {
        Mailbox.answer(queue.settings().home(), queue::answer);
      }
      if (fence != null) {
        fence.check(active.keySet(), this::fenceOff);
      }
      for (Map.Entry<String, Active> e : active.entrySet()) {
        Supervisor s = e.getValue().supervisor;
        if (s == null) {
          continue;
        }
        JobDetail d = scheduler.getJobDetail(JobKey.jobKey(e.getKey(), Queue.GROUP));
        if (d != null && "requested".equals(d.getJobDataMap().getString(Queue.K_CANCEL))
            && cancelled.add(e.getKey())) {
          audit("cancel", Map.of("job", e.getKey()));
          say("cancelling " + e.getKey());
          offThread("stepwarden-cancel", () -> s.interrupt("queue cancel"));
        }
      }
      long now = System.currentTimeMillis();
      if (slots.free() == 0) {
        redateDueStarts(); // reads the pending jobs' triggers only, and only while all are busy
      }
      if (now - lastPurge >= PURGE_EVERY_MS) {
        purgeHistory();
      }
    } catch (SchedulerException | IOException | QueueException | RuntimeException e) {
      if (!stopping) {
        options.console().println("stepwarden serve: housekeeping: " + e.getMessage());
      }
    }
  }

  /**
   * Stops a run of this node that another node continues now (or may: this node could not check
   * in for longer than the takeover time). The trainer is stopped at once and the reason
   * audited; the job's record is left to the node that took it over.
   */
  private void fenceOff(String id, String why) {
    Active a = active.get(id);
    if (a == null || a.fenced != null) {
      return;
    }
    a.fenced = why;
    audit("fenced", Map.of("job", id, "why", why));
    say("job " + id + ": " + why + "; stopping its trainer");
    Supervisor s = a.supervisor;
    if (s != null) {
      offThread("stepwarden-fence", () -> s.interrupt("fenced: " + why));
    }
  }

  static void offThread(String name, Runnable r) {
    Thread t = new Thread(r, name);
    t.setDaemon(true);
    t.start();
  }

  /** An {@code --at} start that came while every slot was busy joins the due jobs' order. */
  private void redateDueStarts() throws SchedulerException {
    Instant now = Instant.now();
    for (TriggerKey k : scheduler.getTriggerKeys(GroupMatcher.triggerGroupEquals(Queue.GROUP))) {
      Trigger t = scheduler.getTrigger(k);
      if (!(t instanceof SimpleTrigger) || t.getNextFireTime() == null
          || Queue.isDueTime(t.getNextFireTime().toInstant())
          || t.getNextFireTime().toInstant().isAfter(now)
          || scheduler.getTriggerState(k) != Trigger.TriggerState.NORMAL) {
        continue;
      }
      JobDetail d = scheduler.getJobDetail(t.getJobKey());
      if (d != null) {
        scheduler.rescheduleJob(k, Queue.dueTrigger(d, k.getName().substring(
            d.getKey().getName().length() + 1)));
      }
    }
  }

  private void purgeHistory() throws QueueException {
    lastPurge = System.currentTimeMillis();
    if (options.keepHistory() != null) {
      int n = queue.purge(Instant.now().minus(options.keepHistory()));
      if (n > 0) {
        audit("purge", Map.of("forgotten_jobs", n, "ended_before",
            Instant.now().minus(options.keepHistory()).toString()));
      }
    }
  }

  /**
   * Once at start: releases {@code --after} jobs whose job ended while no serve ran, and gives a
   * trigger to jobs a stopping serve interrupted but could not re-trigger.
   */
  private void releaseAtStart() throws SchedulerException {
    for (JobKey k : scheduler.getJobKeys(GroupMatcher.jobGroupEquals(Queue.GROUP))) {
      JobDetail d = scheduler.getJobDetail(k);
      if (d == null) {
        continue;
      }
      JobDataMap m = d.getJobDataMap();
      if ("interrupted".equals(m.getString(Queue.K_STATUS))
          && scheduler.getTriggersOfJob(k).isEmpty()) {
        try {
          scheduler.scheduleJob(Queue.dueTrigger(d, "resume"));
          audit("resume-interrupted", Map.of("job", k.getName()));
        } catch (ObjectAlreadyExistsException another) {
          // another node did it
        }
      } else if ("after".equals(m.getString(Queue.K_STATUS))
          && queue.ended(m.getString(Queue.K_AFTER))) {
        release(d);
      }
    }
  }

  /** A job ended here: the jobs that wait for it may start. */
  void jobEnded(String id) {
    lastJobEndMillis.set(System.currentTimeMillis());
    try {
      for (JobKey k : scheduler.getJobKeys(GroupMatcher.jobGroupEquals(Queue.GROUP))) {
        JobDetail d = scheduler.getJobDetail(k);
        if (d != null && "after".equals(d.getJobDataMap().getString(Queue.K_STATUS))
            && id.equals(d.getJobDataMap().getString(Queue.K_AFTER))) {
          release(d);
        }
      }
    } catch (SchedulerException e) {
      say("cannot release the jobs after " + id + " (the next serve start does): "
          + e.getMessage());
    }
  }

  private void release(JobDetail d) throws SchedulerException {
    try {
      scheduler.scheduleJob(Queue.dueTrigger(d, "after"));
    } catch (ObjectAlreadyExistsException another) {
      return; // another node released it first
    }
    JobDataMap m = d.getJobDataMap();
    m.put(Queue.K_STATUS, "waiting");
    Queue.putSafely(scheduler, d);
    audit("released", Map.of("job", d.getKey().getName(), "after", m.getString(Queue.K_AFTER)));
  }

  private Map<String, Integer> countByState() {
    try {
      return queue.countByState();
    } catch (QueueException e) {
      say(e.getMessage());
      return Map.of();
    }
  }

  private int busySlots() {
    return slots.size() - slots.free();
  }

  /** Jobs running in this process now. */
  public Set<String> runningHere() {
    return Set.copyOf(active.keySet());
  }

  /**
   * Stops serving: no new job starts, running ones are interrupted and re-triggered so the next
   * serve resumes them, then the scheduler shuts down.
   */
  @Override
  public void close() {
    // Quartz's JDBC store makes a proxy of each connection with the context class loader; a
    // thread started from a signal handler has none ("not visible from class loader: null").
    Thread.currentThread().setContextClassLoader(Night.class.getClassLoader());
    stopping = true;
    tick.shutdownNow();
    try {
      scheduler.standby();
      for (Map.Entry<String, Active> e : active.entrySet()) {
        if (e.getValue().fenced != null) {
          continue; // another node continues it
        }
        try {
          JobDetail d = scheduler.getJobDetail(JobKey.jobKey(e.getKey(), Queue.GROUP));
          if (d != null) {
            scheduler.scheduleJob(Queue.dueTrigger(d, "resume-" + System.currentTimeMillis()));
          }
        } catch (SchedulerException ex) {
          say("could not keep " + e.getKey() + " for the next serve (it resumes it at start"
              + " all the same): " + ex.getMessage());
        }
      }
      // All at once: one after the other, four slots would run past the stop bound.
      List<Runnable> stops = new ArrayList<>();
      for (Active a : active.values()) {
        Supervisor s = a.supervisor;
        if (s != null) {
          stops.add(() -> s.interrupt("serve stopping"));
        }
      }
      Stops.allAtOnce(stops);
      scheduler.shutdown(true);
    } catch (SchedulerException e) {
      say("stopping: " + e.getMessage());
    }
    if (meters != null) {
      meters.close();
    }
    if (fence != null) {
      fence.close();
    }
    audit("serve-stop", Map.of("node", node));
    try {
      log.close();
    } catch (IOException e) {
      say(e.getMessage());
    }
  }
}
