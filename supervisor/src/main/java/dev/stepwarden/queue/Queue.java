package dev.stepwarden.queue;

import dev.stepwarden.rules.ConfigException;
import dev.stepwarden.rules.GuardFile;
import dev.stepwarden.rules.GuardFiles;
import java.io.IOException;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.time.Duration;
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
import tools.jackson.databind.JsonNode;
import tools.jackson.databind.PropertyNamingStrategies;
import tools.jackson.databind.json.JsonMapper;

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
  static final String K_COHORT = "cohort";
  /** The key older builds stored the cohort under. */
  static final String K_COHORT_OLD = "study";
  static final String K_ENDED = "ended";
  static final String K_CANCEL = "cancel";
  static final String K_REASON = "reason";

  static final List<String> ENDED = List.of("done", "cancelled", "failed", "median-stopped");

  /** Every JSON the queue prints or passes on uses snake_case keys, as its files do. */
  static final JsonMapper JSON = JsonMapper.builder()
      .propertyNamingStrategy(PropertyNamingStrategies.SNAKE_CASE).build();
  /** How long a command waits for a short-lived holder of the embedded store's lock. */
  private static final Duration LOCK_PATIENCE = Duration.ofSeconds(10);
  /** How long a command waits for the answer of the serve that holds the embedded store. */
  private static final Duration SERVE_PATIENCE = Duration.ofSeconds(15);

  private final QueueSettings settings;
  private final Scheduler scheduler;
  /** The embedded store's folder and lock; null for PostgreSQL. */
  private final Home home;
  /** Set when a serve holds the embedded store: requests go to it through {@link Mailbox}. */
  private final Home.Holder remote;

  private Queue(QueueSettings settings, Scheduler scheduler, Home home, Home.Holder remote) {
    this.settings = settings;
    this.scheduler = scheduler;
    this.home = home;
    this.remote = remote;
  }

  /**
   * Opens the queue without starting it (add, list, cancel, purge). On the embedded store held by
   * a running serve, the commands are passed to that serve.
   */
  public static Queue open(QueueSettings settings) throws QueueException {
    return open(settings, 1, "queue");
  }

  /**
   * Opens a queue sized for serving ({@code slots} Quartz threads). On the embedded store, a
   * second serve is refused at once, naming the live one.
   */
  public static Queue openForServe(QueueSettings settings, int slots) throws QueueException {
    return open(settings, slots, "serve");
  }

  private static Queue open(QueueSettings settings, int threads, String role)
      throws QueueException {
    quietLibraries();
    Home home = settings.postgres() ? null : new Home(settings.home());
    try {
      if (home != null) {
        home.prepare(settings.runs());
        Home.Holder holder = lock(home, role);
        if (holder != null) {
          return new Queue(settings, null, null, holder);
        }
        home.checkStore();
      } else {
        Home.privateDirectories(settings.home());
        Files.createDirectories(settings.runs());
      }
    } catch (IOException e) {
      if (home != null) {
        home.unlock();
      }
      throw new QueueException("cannot create the queue folder " + settings.home() + ": "
          + e.getMessage() + "; choose another --home", e);
    } catch (QueueException e) {
      if (home != null) {
        home.unlock();
      }
      throw e;
    }
    try {
      Schema.apply(settings);
      if (home != null) {
        home.markCreated();
      }
      Properties p = settings.quartz(threads, QueueSettings.SCHEDULER_NAME);
      StdSchedulerFactory f = new StdSchedulerFactory(p);
      return new Queue(settings, f.getScheduler(), home, null);
    } catch (SchedulerException | IOException e) {
      if (home != null) {
        home.unlock();
      }
      throw new QueueException("cannot open the queue at " + Schema.redact(settings.url())
          + ": " + e.getMessage(), e);
    } catch (QueueException e) {
      if (home != null) {
        home.unlock();
      }
      throw e;
    }
  }

  /**
   * Takes the embedded store's lock; returns the serve that holds it when a command should pass
   * its request on. A holder that is another command is waited for (it holds the lock for a
   * moment); a serve refuses another serve.
   */
  private static Home.Holder lock(Home home, String role) throws IOException, QueueException {
    long end = System.nanoTime() + LOCK_PATIENCE.toNanos();
    while (true) {
      Home.Holder h = home.tryLock(role);
      if (h == null) {
        return null;
      }
      if ("serve".equals(h.role())) {
        if ("serve".equals(role)) {
          throw new QueueException("another serve holds the queue in " + home.dir() + ": "
              + h.describe() + "; one serve per queue folder: stop that one first, or give"
              + " this one another --home (or share a PostgreSQL queue with --db ... --cluster)");
        }
        return h;
      }
      if (System.nanoTime() > end) {
        throw new QueueException(h.describe() + " has held the queue in " + home.dir()
            + " for over " + LOCK_PATIENCE.toSeconds() + " s; try again when it has ended");
      }
      try {
        Thread.sleep(100);
      } catch (InterruptedException e) {
        Thread.currentThread().interrupt();
        throw new QueueException("interrupted while waiting for the queue's lock", e);
      }
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

  /** Whether this handle passes its requests to the serve that holds the embedded store. */
  boolean remote() {
    return remote != null;
  }

  private JsonNode ask(Map<String, ?> request) throws QueueException {
    return Mailbox.call(settings.home(), request, remote, SERVE_PATIENCE);
  }

  /** Adds a job; returns its id. The guard file is validated now, with the overrides. */
  public String add(JobRequest r) throws QueueException {
    if (remote != null) {
      return ask(Map.of("op", "add", "request", r.toJson())).get("id").asString();
    }
    if (r.priority() < 0 || r.priority() > MAX_PRIORITY) {
      throw new QueueException("--priority " + r.priority() + ": give a number from 0 to "
          + MAX_PRIORITY + " (higher runs first)");
    }
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
      if (r.cohort() != null) {
        data.put(K_COHORT, r.cohort());
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
        scheduler.scheduleJob(trigger(id, "start", r.at(), r.cron(), r.priority(),
            Instant.parse(data.getString(K_ADDED))));
      }
      return id;
    } catch (SchedulerException e) {
      throw new QueueException("cannot add the job to the queue: " + e.getMessage(), e);
    }
  }

  /** The highest priority; 0 is the lowest. */
  static final int MAX_PRIORITY = 99;
  /** One priority's stretch of due times: 2^34 ms of the time axis (about 199 days). */
  private static final long DUE_SPAN_MS = 1L << 34;
  /** Adding order within a priority, in steps of 100 ms: the stretch holds some 54 years. */
  static final long ORDER_STEP_MS = 100;
  private static final long ADDED_ORIGIN_MS = Instant.parse("2026-01-01T00:00:00Z")
      .toEpochMilli();

  /**
   * The fire time of a job that is due now (started now, released by {@code --after}, resumed,
   * or an {@code --at} job whose time passed while every slot was busy). Quartz hands out due
   * triggers by fire time first, then by priority; so every due job gets a fire time long past
   * (between 1970 and mid-2024; Quartz reads a time of 0 or less as "never") that encodes its
   * priority first and when it was added (to 100 ms) second: the highest priority starts first
   * whenever a slot frees, and jobs of one priority start in the order they were added. These
   * triggers ignore misfires (a fire time in the past is the point), so none waits for Quartz's
   * misfire scan while a slot is idle.
   */
  static Instant dueTime(int priority, Instant added) {
    long p = Math.max(0, Math.min(MAX_PRIORITY, priority));
    long order = Math.max(0, Math.min(DUE_SPAN_MS - 1,
        (added.toEpochMilli() - ADDED_ORIGIN_MS) / ORDER_STEP_MS));
    return Instant.ofEpochMilli(1 + (MAX_PRIORITY - p) * DUE_SPAN_MS + order);
  }

  /** Whether {@code t} is a fire time made by {@link #dueTime} (shown as "due" in lists). */
  static boolean isDueTime(Instant t) {
    return t.toEpochMilli() <= (MAX_PRIORITY + 1) * DUE_SPAN_MS;
  }

  static Trigger trigger(String id, String name, Instant at, String cron, int priority,
      Instant added) {
    TriggerBuilder<Trigger> b = TriggerBuilder.newTrigger().withIdentity(id + "-" + name, GROUP)
        .forJob(id, GROUP).withPriority(priority);
    if (cron != null) {
      return b.withSchedule(CronScheduleBuilder.cronSchedule(cron)
          .withMisfireHandlingInstructionFireAndProceed()).build();
    }
    b = b.startAt(java.util.Date.from(at == null ? dueTime(priority, added) : at));
    return b.withSchedule(SimpleScheduleBuilder.simpleSchedule()
        .withMisfireHandlingInstructionIgnoreMisfires()).build();
  }

  /** A due-now trigger for the job in {@code d} (see {@link #dueTime}). */
  static Trigger dueTrigger(JobDetail d, String name) {
    JobDataMap m = d.getJobDataMap();
    String added = m.getString(K_ADDED);
    return trigger(d.getKey().getName(), name, null, null,
        Integer.parseInt(m.getString(K_PRIORITY)), added == null ? Instant.EPOCH
            : Instant.parse(added));
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
    if (remote != null) {
      List<JobView> out = new ArrayList<>();
      for (JsonNode j : ask(Map.of("op", "list")).get("jobs")) {
        out.add(JSON.treeToValue(j, JobView.class));
      }
      return out;
    }
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
    boolean due = next != null && isDueTime(next);
    return new JobView(id, m.getString(K_NAME), m.getString(K_STATUS),
        Integer.parseInt(m.getString(K_PRIORITY)), m.getString(K_AFTER),
        m.getString(K_SCHEDULE), due ? null : next, due, m.getString(K_OUTCOME),
        exit == null ? null : Integer.valueOf(exit), m.getString(K_RUN_DIR),
        m.getString(K_NODE), Integer.parseInt(m.getString(K_ATTEMPTS)), cohort(m),
        m.getString(K_ENDED));
  }

  /** One job. */
  public JobView get(String id) throws QueueException {
    if (remote != null) {
      return list().stream().filter(v -> v.id().equals(id)).findFirst().orElseThrow(
          () -> new QueueException("no job " + id + " in the queue; see queue list"));
    }
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
    if (remote != null) {
      return JSON.treeToValue(ask(Map.of("op", "cancel", "id", id)).get("job"), JobView.class);
    }
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
        m.put(K_ENDED, Instant.now().toString());
      }
      scheduler.addJob(d, true, true);
      return view(scheduler.getJobDetail(key));
    } catch (SchedulerException e) {
      throw new QueueException("cannot cancel " + id + ": " + e.getMessage(), e);
    }
  }

  /** Starts running jobs on this process's slots; close the returned handle to stop. */
  public Night serve(Night.Options options) throws QueueException {
    if (remote != null) {
      throw new IllegalStateException("a queue opened for a command cannot serve");
    }
    return Night.start(this, options);
  }

  /**
   * Forgets ended jobs that ended before {@code before} (their run directories stay: they are
   * the user's). Returns how many were forgotten.
   */
  public int purge(Instant before) throws QueueException {
    if (remote != null) {
      return ask(Map.of("op", "purge", "before", before.toString())).get("purged").asInt();
    }
    try {
      int n = 0;
      for (JobKey k : scheduler.getJobKeys(GroupMatcher.jobGroupEquals(GROUP))) {
        JobDetail d = scheduler.getJobDetail(k);
        if (d == null) {
          continue;
        }
        JobDataMap m = d.getJobDataMap();
        String when = m.getString(K_ENDED) != null ? m.getString(K_ENDED) : m.getString(K_ADDED);
        if (ENDED.contains(m.getString(K_STATUS)) && m.getString(K_CRON) == null
            && when != null && Instant.parse(when).isBefore(before)
            && scheduler.getTriggersOfJob(k).isEmpty() && scheduler.deleteJob(k)) {
          n++;
        }
      }
      return n;
    } catch (SchedulerException e) {
      throw new QueueException("cannot purge the queue: " + e.getMessage(), e);
    }
  }

  /** Serve's side of {@link Mailbox}: one request of a command, on this serve's store. */
  Map<String, ?> answer(JsonNode request) {
    try {
      return switch (request.path("op").asString("")) {
        case "add" -> Map.of("id", add(JobRequest.fromJson(request.get("request"))));
        case "list" -> Map.of("jobs", list().stream().map(v -> JSON.valueToTree(v)).toList());
        case "cancel" -> Map.of("job", JSON.valueToTree(cancel(request.get("id").asString())));
        case "purge" -> Map.of("purged", purge(Instant.parse(request.get("before")
            .asString())));
        default -> Map.of("error", "serve does not know the request '" + request.path("op")
            .asString("") + "'; are the command and serve of one version?");
      };
    } catch (QueueException | RuntimeException e) {
      return Map.of("error", String.valueOf(e.getMessage()));
    }
  }

  /**
   * The number of jobs in each state, in one read of the job table (the metrics page asks for
   * it; reading each job through Quartz would cost two reads per job of the history).
   */
  public Map<String, Integer> countByState() throws QueueException {
    Map<String, Integer> n = new java.util.TreeMap<>();
    Properties login = new Properties();
    login.setProperty("user", settings.user() == null ? (settings.postgres() ? "postgres" : "sa")
        : settings.user());
    login.setProperty("password", settings.password() == null ? "" : settings.password());
    try (java.sql.Connection c = java.sql.DriverManager.getConnection(settings.url(), login);
        java.sql.PreparedStatement st = c.prepareStatement("SELECT JOB_DATA FROM "
            + settings.tablePrefix() + "JOB_DETAILS WHERE SCHED_NAME = ? AND JOB_GROUP = ?")) {
      st.setString(1, QueueSettings.SCHEDULER_NAME);
      st.setString(2, GROUP);
      try (java.sql.ResultSet rs = st.executeQuery()) {
        while (rs.next()) {
          Properties p = new Properties();
          try (java.io.InputStream in = rs.getBinaryStream(1)) {
            if (in != null) {
              p.load(in); // useProperties=true: the job data is a properties text
            }
          }
          n.merge(p.getProperty(K_STATUS, "?"), 1, Integer::sum);
        }
      }
      return n;
    } catch (java.sql.SQLException | IOException e) {
      throw new QueueException("cannot count the queue's jobs: " + e.getMessage(), e);
    }
  }

  static String cohort(JobDataMap m) {
    return m.getString(K_COHORT) != null ? m.getString(K_COHORT) : m.getString(K_COHORT_OLD);
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
      if (scheduler != null) {
        scheduler.shutdown(true);
      }
    } catch (SchedulerException e) {
      System.err.println("stepwarden: closing the queue: " + e.getMessage());
    } finally {
      if (home != null) {
        home.unlock();
      }
    }
  }
}
