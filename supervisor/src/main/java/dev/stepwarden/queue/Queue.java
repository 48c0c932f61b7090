package dev.stepwarden.queue;

import dev.stepwarden.rules.ConfigException;
import dev.stepwarden.rules.GuardFile;
import dev.stepwarden.rules.GuardFiles;
import java.io.IOException;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.time.Instant;
import java.util.ArrayList;
import java.util.Comparator;
import java.util.HexFormat;
import java.util.List;
import java.util.Map;
import java.util.Properties;
import java.util.concurrent.ThreadLocalRandom;
import org.quartz.CronExpression;
import org.quartz.CronScheduleBuilder;
import org.quartz.JobBuilder;
import org.quartz.JobDataMap;
import org.quartz.JobDetail;
import org.quartz.JobKey;
import org.quartz.ObjectAlreadyExistsException;
import org.quartz.Scheduler;
import org.quartz.SchedulerException;
import org.quartz.SimpleScheduleBuilder;
import org.quartz.Trigger;
import org.quartz.TriggerBuilder;
import org.quartz.impl.StdSchedulerFactory;
import org.quartz.impl.matchers.GroupMatcher;

/**
 * The overnight queue: jobs are guard files plus overrides, kept in Quartz's JDBC job store
 * (JobStoreTX) so that a restarted {@code serve} knows what ran, what was running and what is
 * next.
 *
 * <p>Design. A job is a durable Quartz job (group {@code runs}) whose string-only data map
 * ({@code useProperties=true}) holds the guard file text with the overrides applied, so nodes
 * on other hosts need no copy of the user's file. Its triggers say when it starts: now, {@code
 * --at} (a one-shot trigger) or {@code --cron}. Jobs request recovery: when the process running
 * one dies, the next serve (or, in a cluster, a live node) fires it again, and the job reads its
 * run directory to decide between "already ended" (record it), "unfinished" (resume) and
 * "never started". The slots are the Quartz thread pool; each job runs the supervisor in-process
 * on its slot's thread (see {@link QueuedRun} for why not a child JVM).
 *
 * <p>Misfire policy (the machine was off, or every slot was busy, for longer than 60 s past a
 * start time): a one-shot job starts as soon as serve is up and a slot is free (Quartz
 * fire-now); a cron job runs once for all the firings it missed, then keeps its schedule (Quartz
 * fire-once-and-proceed). Nothing is silently dropped.
 */
public final class Queue implements AutoCloseable {
  static final String GROUP = "runs";
  static final String K_GUARDS = "guards";
  static final String K_RULES = "rules";
  static final String K_NAME = "name";
  static final String K_STATUS = "status";
  static final String K_PRIORITY = "priority";
  static final String K_AFTER = "after";
  static final String K_SCHEDULE = "schedule";
  static final String K_CRON = "cron";
  static final String K_ADDED = "added";
  static final String K_OUTCOME = "outcome";
  static final String K_EXIT = "exit_code";
  static final String K_RUN_DIR = "run_dir";
  static final String K_NODE = "node";
  static final String K_ATTEMPTS = "attempts";
  static final String K_STUDY = "study";
  static final String K_CANCEL = "cancel";
  static final String K_REASON = "reason";

  static final List<String> ENDED = List.of("done", "cancelled", "failed", "median-stopped");

  private final QueueSettings settings;
  private final Scheduler scheduler;

  private Queue(QueueSettings settings, Scheduler scheduler) {
    this.settings = settings;
    this.scheduler = scheduler;
  }

  /** Opens the queue without starting it (add, list, cancel). */
  public static Queue open(QueueSettings settings) throws QueueException {
    return open(settings, 1);
  }

  static Queue open(QueueSettings settings, int threads) throws QueueException {
    quietLibraries();
    try {
      Files.createDirectories(settings.home());
      Files.createDirectories(settings.runs());
    } catch (IOException e) {
      throw new QueueException("cannot create the queue folder " + settings.home() + ": "
          + e.getMessage() + "; choose another --home", e);
    }
    Schema.apply(settings);
    Properties p = settings.quartz(threads, QueueSettings.SCHEDULER_NAME);
    try {
      StdSchedulerFactory f = new StdSchedulerFactory(p);
      return new Queue(settings, f.getScheduler());
    } catch (SchedulerException e) {
      throw new QueueException("cannot open the queue at " + Schema.redact(settings.url())
          + ": " + e.getMessage(), e);
    }
  }

  /** Quartz and Hikari report every start at INFO; a command-line tool wants warnings only. */
  private static void quietLibraries() {
    for (String lib : List.of("org.quartz", "com.zaxxer.hikari")) {
      String key = "org.slf4j.simpleLogger.log." + lib;
      if (System.getProperty(key) == null) {
        System.setProperty(key, "warn");
      }
    }
  }

  public QueueSettings settings() {
    return settings;
  }

  Scheduler scheduler() {
    return scheduler;
  }

  /** Adds a job; returns its id. The guard file is validated now, with the overrides. */
  public String add(JobRequest r) throws QueueException {
    String text;
    try {
      text = Files.readString(r.rules(), StandardCharsets.UTF_8);
      GuardFiles.load(r.rules());
    } catch (IOException e) {
      throw new QueueException("cannot read the guard file " + r.rules() + ": " + e.getMessage());
    } catch (ConfigException e) {
      throw new QueueException(e.getMessage());
    }
    Map<String, String> sets = new java.util.LinkedHashMap<>(r.overrides());
    String merged = Overrides.apply(text, sets);
    GuardFile g;
    try {
      g = GuardFiles.parse(merged.getBytes(StandardCharsets.UTF_8), r.rules());
    } catch (ConfigException e) {
      throw new QueueException("after --set: " + e.getMessage());
    }
    if (g.run().command().isEmpty()) {
      throw new QueueException(r.rules() + ": a queued job needs run.command in the guard file"
          + " (or --set 'run.command=[python3, train.py]')");
    }
    Path workdir = g.run().workdir() == null ? r.workdir() : r.workdir().resolve(g.run().workdir());
    sets.put("run.workdir", "'" + workdir.toString().replace("'", "''") + "'");
    merged = Overrides.apply(text, sets);
    if (r.cron() != null && !CronExpression.isValidExpression(r.cron())) {
      throw new QueueException("--cron '" + r.cron() + "' is not a Quartz cron expression"
          + " (six or seven fields, seconds first), e.g. '0 0 22 * * ?' for 22:00 daily");
    }
    try {
      if (r.after() != null && !scheduler.checkExists(JobKey.jobKey(r.after(), GROUP))) {
        throw new QueueException("--after " + r.after() + ": no such job; see queue list");
      }
      String id = newId(g.run().name());
      JobDataMap data = new JobDataMap();
      data.put(K_GUARDS, merged);
      data.put(K_RULES, r.rules().toAbsolutePath().toString());
      data.put(K_NAME, g.run().name());
      data.put(K_PRIORITY, Integer.toString(r.priority()));
      data.put(K_ADDED, Instant.now().toString());
      data.put(K_ATTEMPTS, "0");
      if (r.study() != null) {
        data.put(K_STUDY, r.study());
      }
      String schedule = r.cron() != null ? "cron " + r.cron() : r.at() != null ? "at " + r.at()
          : "now";
      data.put(K_SCHEDULE, schedule);
      if (r.cron() != null) {
        data.put(K_CRON, r.cron());
      }
      boolean waits = r.after() != null && !ended(r.after());
      if (r.after() != null) {
        data.put(K_AFTER, r.after());
      }
      data.put(K_STATUS, waits ? "after" : "waiting");
      JobDetail job = JobBuilder.newJob(QueuedRun.class).withIdentity(id, GROUP)
          .withDescription(g.run().name()).storeDurably().requestRecovery()
          .usingJobData(data).build();
      scheduler.addJob(job, false);
      if (!waits) {
        scheduler.scheduleJob(trigger(id, "start", r.at(), r.cron(), r.priority()));
      }
      return id;
    } catch (SchedulerException e) {
      throw new QueueException("cannot add the job to the queue: " + e.getMessage(), e);
    }
  }

  static Trigger trigger(String id, String name, Instant at, String cron, int priority) {
    TriggerBuilder<Trigger> b = TriggerBuilder.newTrigger().withIdentity(id + "-" + name, GROUP)
        .forJob(id, GROUP).withPriority(priority);
    if (cron != null) {
      return b.withSchedule(CronScheduleBuilder.cronSchedule(cron)
          .withMisfireHandlingInstructionFireAndProceed()).build();
    }
    b = at == null ? b.startNow() : b.startAt(java.util.Date.from(at));
    return b.withSchedule(SimpleScheduleBuilder.simpleSchedule()
        .withMisfireHandlingInstructionFireNow()).build();
  }

  private String newId(String name) throws SchedulerException {
    String stem = name.replaceAll("[^A-Za-z0-9_-]", "_");
    stem = stem.length() > 40 ? stem.substring(0, 40) : stem;
    while (true) {
      byte[] b = new byte[3];
      ThreadLocalRandom.current().nextBytes(b);
      String id = stem + "-" + HexFormat.of().formatHex(b);
      if (!scheduler.checkExists(JobKey.jobKey(id, GROUP))) {
        return id;
      }
    }
  }

  boolean ended(String id) throws SchedulerException {
    JobDetail d = scheduler.getJobDetail(JobKey.jobKey(id, GROUP));
    return d == null || ENDED.contains(d.getJobDataMap().getString(K_STATUS));
  }

  /** Every job, oldest first. */
  public List<JobView> list() throws QueueException {
    try {
      List<JobView> out = new ArrayList<>();
      for (JobKey k : scheduler.getJobKeys(GroupMatcher.jobGroupEquals(GROUP))) {
        JobDetail d = scheduler.getJobDetail(k);
        if (d == null) {
          continue;
        }
        out.add(view(d));
      }
      return sortByAdded(out);
    } catch (SchedulerException e) {
      throw new QueueException("cannot read the queue: " + e.getMessage(), e);
    }
  }

  private final Map<String, String> addedCache = new java.util.concurrent.ConcurrentHashMap<>();

  private List<JobView> sortByAdded(List<JobView> views) {
    views.sort(Comparator.comparing((JobView v) -> addedCache.getOrDefault(v.id(), ""))
        .thenComparing(JobView::id));
    return views;
  }

  private JobView view(JobDetail d) throws SchedulerException {
    JobDataMap m = d.getJobDataMap();
    String id = d.getKey().getName();
    addedCache.put(id, m.getString(K_ADDED) == null ? "" : m.getString(K_ADDED));
    Instant next = null;
    for (Trigger t : scheduler.getTriggersOfJob(d.getKey())) {
      if (t.getNextFireTime() != null && (next == null || t.getNextFireTime().toInstant()
          .isBefore(next))) {
        next = t.getNextFireTime().toInstant();
      }
    }
    String exit = m.getString(K_EXIT);
    return new JobView(id, m.getString(K_NAME), m.getString(K_STATUS),
        Integer.parseInt(m.getString(K_PRIORITY)), m.getString(K_AFTER),
        m.getString(K_SCHEDULE), next, m.getString(K_OUTCOME),
        exit == null ? null : Integer.valueOf(exit), m.getString(K_RUN_DIR),
        m.getString(K_NODE), Integer.parseInt(m.getString(K_ATTEMPTS)), m.getString(K_STUDY));
  }

  /** One job. */
  public JobView get(String id) throws QueueException {
    try {
      JobDetail d = scheduler.getJobDetail(JobKey.jobKey(id, GROUP));
      if (d == null) {
        throw new QueueException("no job " + id + " in the queue; see queue list");
      }
      return view(d);
    } catch (SchedulerException e) {
      throw new QueueException("cannot read the queue: " + e.getMessage(), e);
    }
  }

  /**
   * Cancels a job: a waiting one never starts; a running one is stopped by the serve that runs
   * it (within about a second), its trainer's whole tree with it.
   */
  public JobView cancel(String id) throws QueueException {
    try {
      JobKey key = JobKey.jobKey(id, GROUP);
      JobDetail d = scheduler.getJobDetail(key);
      if (d == null) {
        throw new QueueException("no job " + id + " in the queue; see queue list");
      }
      String status = d.getJobDataMap().getString(K_STATUS);
      if (ENDED.contains(status) && d.getJobDataMap().getString(K_CRON) == null) {
        throw new QueueException("job " + id + " has already ended (" + status + ")");
      }
      for (Trigger t : scheduler.getTriggersOfJob(key)) {
        scheduler.unscheduleJob(t.getKey());
      }
      JobDataMap m = d.getJobDataMap();
      if ("running".equals(status)) {
        m.put(K_CANCEL, "requested");
      } else {
        m.put(K_STATUS, "cancelled");
      }
      scheduler.addJob(d, true, true);
      return view(scheduler.getJobDetail(key));
    } catch (SchedulerException e) {
      throw new QueueException("cannot cancel " + id + ": " + e.getMessage(), e);
    }
  }

  /** Starts running jobs on this process's slots; close the returned handle to stop. */
  public Night serve(Night.Options options) throws QueueException {
    return Night.start(this, options);
  }

  /** Opens a queue sized for serving ({@code slots} Quartz threads). */
  public static Queue openForServe(QueueSettings settings, int slots) throws QueueException {
    return open(settings, slots);
  }

  static void putSafely(Scheduler s, JobDetail d) {
    try {
      s.addJob(d, true, true);
    } catch (ObjectAlreadyExistsException ignored) {
      // replace=true never throws this
    } catch (SchedulerException e) {
      System.err.println("stepwarden: could not record the state of job " + d.getKey().getName()
          + ": " + e.getMessage());
    }
  }

  @Override
  public void close() {
    try {
      scheduler.shutdown(true);
    } catch (SchedulerException e) {
      System.err.println("stepwarden: closing the queue: " + e.getMessage());
    }
  }
}
