package dev.stepwarden.queue;

import java.nio.file.Path;
import java.time.Duration;
import java.util.Properties;

/**
 * Where the queue lives and how Quartz reaches it.
 *
 * @param home the folder for the embedded database and the default run folder
 * @param jdbcUrl null for the embedded H2 file {@code home/queue}; else a PostgreSQL URL
 * @param tablePrefix the Quartz table prefix (several queues may share one database)
 * @param clustered several serve processes share the store (PostgreSQL only)
 * @param checkin how often a clustered node checks in; a node silent for longer (plus Quartz's
 *     own 7.5 s grace) is declared dead and its recoverable jobs are taken over
 * @param runs where run directories go (default {@code home/runs}); shared storage in a cluster
 */
public record QueueSettings(Path home, String jdbcUrl, String user, String password,
    String tablePrefix, boolean clustered, Duration checkin, Path runs) {
  /** The Quartz scheduler name: every node of one queue must use the same one. */
  static final String SCHEDULER_NAME = "stepwarden";
  /** How late a trigger may fire before Quartz applies its misfire instruction. */
  static final long MISFIRE_THRESHOLD_MS = 60_000;

  public QueueSettings {
    home = home.toAbsolutePath().normalize();
    tablePrefix = tablePrefix == null ? "SW_QRTZ_" : tablePrefix;
    checkin = checkin == null ? Duration.ofSeconds(5) : checkin;
    runs = runs == null ? home.resolve("runs") : runs.toAbsolutePath().normalize();
    if (!tablePrefix.matches("[A-Za-z][A-Za-z0-9_]{0,30}")) {
      throw new IllegalArgumentException("table prefix '" + tablePrefix + "': use letters, digits"
          + " and '_' (at most 31), starting with a letter");
    }
    if (clustered && !isPostgres(jdbcUrl)) {
      throw new IllegalArgumentException("cluster mode needs a shared database: give --db"
          + " jdbc:postgresql://HOST/DB (the embedded H2 file belongs to one serve)");
    }
  }

  /** The default: an embedded H2 file under {@code home}, one serve process. */
  public static QueueSettings local(Path home) {
    return new QueueSettings(home, null, null, null, null, false, null, null);
  }

  /** The default home: {@code ~/.stepwarden}. */
  public static Path defaultHome() {
    return Path.of(System.getProperty("user.home"), ".stepwarden");
  }

  static boolean isPostgres(String url) {
    return url != null && url.startsWith("jdbc:postgresql:");
  }

  boolean postgres() {
    return isPostgres(jdbcUrl);
  }

  String url() {
    if (jdbcUrl != null) {
      return jdbcUrl;
    }
    // In this process only: no server mode (no listener); H2 locks the file, and commands reach a
    // serve that holds it through its request folder. No trace file (it would be world-readable).
    return "jdbc:h2:file:" + home.resolve("queue") + ";TRACE_LEVEL_FILE=0";
  }

  /** The Quartz properties: JDBC job store (JobStoreTX), string-only job data, Hikari pool. */
  Properties quartz(int threads, String instanceName) {
    Properties p = new Properties();
    p.setProperty("org.quartz.scheduler.instanceName", instanceName);
    p.setProperty("org.quartz.scheduler.instanceId", clustered ? "AUTO" : "local");
    p.setProperty("org.quartz.scheduler.skipUpdateCheck", "true");
    // A job added by another process is seen within this time (Quartz's floor is 1 s).
    p.setProperty("org.quartz.scheduler.idleWaitTime", "1000");
    p.setProperty("org.quartz.threadPool.class", "org.quartz.simpl.SimpleThreadPool");
    p.setProperty("org.quartz.threadPool.threadCount", Integer.toString(threads));
    p.setProperty("org.quartz.threadPool.threadNamePrefix", "stepwarden-slot");
    p.setProperty("org.quartz.jobStore.class", "org.quartz.impl.jdbcjobstore.JobStoreTX");
    p.setProperty("org.quartz.jobStore.driverDelegateClass", postgres()
        ? "org.quartz.impl.jdbcjobstore.PostgreSQLDelegate"
        : "org.quartz.impl.jdbcjobstore.StdJDBCDelegate");
    p.setProperty("org.quartz.jobStore.useProperties", "true");
    p.setProperty("org.quartz.jobStore.tablePrefix", tablePrefix);
    p.setProperty("org.quartz.jobStore.misfireThreshold", Long.toString(MISFIRE_THRESHOLD_MS));
    // After a database error Quartz retries on this period (its default 15 s stalls a shutdown).
    p.setProperty("org.quartz.jobStore.dbRetryInterval", "1000");
    p.setProperty("org.quartz.jobStore.isClustered", Boolean.toString(clustered));
    p.setProperty("org.quartz.jobStore.clusterCheckinInterval",
        Long.toString(checkin.toMillis()));
    p.setProperty("org.quartz.jobStore.dataSource", "queue");
    p.setProperty("org.quartz.dataSource.queue.provider", "hikaricp");
    p.setProperty("org.quartz.dataSource.queue.driver", postgres() ? "org.postgresql.Driver"
        : "org.h2.Driver");
    p.setProperty("org.quartz.dataSource.queue.URL", url());
    p.setProperty("org.quartz.dataSource.queue.user", user == null ? (postgres() ? "postgres"
        : "sa") : user);
    p.setProperty("org.quartz.dataSource.queue.password", password == null ? "" : password);
    p.setProperty("org.quartz.dataSource.queue.maxConnections", Integer.toString(threads + 3));
    return p;
  }
}
