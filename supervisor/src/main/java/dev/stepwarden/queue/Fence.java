package dev.stepwarden.queue;

import java.sql.Connection;
import java.sql.DriverManager;
import java.sql.PreparedStatement;
import java.sql.ResultSet;
import java.sql.SQLException;
import java.util.HashSet;
import java.util.Properties;
import java.util.Set;
import java.util.function.BiConsumer;
import java.util.function.LongSupplier;

/**
 * Fencing of a cluster node. Quartz declares a node dead when it has not checked in for its
 * check-in interval plus 7.5 s, and another node then fires that node's jobs again; Quartz itself
 * only logs a warning when the "dead" node turns out to be alive (a frozen VM, a network split
 * from the database). So each tick this node asks the database which of its firings still exist:
 * a job running here whose firing is gone was taken over, and its trainer is stopped (a frozen
 * node learns it at its first tick after waking). A node that cannot ask for longer than the
 * takeover time stops all its trainers, as another node may be continuing them by now.
 *
 * <p>This stops the late node's trainers within about a second of its waking up; the run
 * directory's lock ({@link RunLock}) is what keeps the two apart before that: the taking-over
 * node waits for it, so only one supervisor ever writes a run directory.
 */
final class Fence implements AutoCloseable {
  /** Quartz's own grace on top of the check-in interval before it takes a node over. */
  static final long QUARTZ_GRACE_MS = 7_500;

  private final QueueSettings settings;
  private final String node;
  private final long takeoverMs;
  private final LongSupplier clock;
  private Connection connection;
  private long lastOk;

  Fence(QueueSettings settings, String node) {
    this(settings, node, System::currentTimeMillis);
  }

  Fence(QueueSettings settings, String node, LongSupplier clock) {
    this.settings = settings;
    this.node = node;
    this.takeoverMs = settings.checkin().toMillis() + QUARTZ_GRACE_MS;
    this.clock = clock;
    this.lastOk = clock.getAsLong();
  }

  /** Calls {@code fence(job, why)} for every job of {@code running} this node must give up. */
  void check(Set<String> running, BiConsumer<String, String> fence) {
    long before = clock.getAsLong();
    // copied before asking: a job that starts meanwhile has a firing the answer may not show yet
    Set<String> jobs = Set.copyOf(running);
    Set<String> firings;
    try {
      firings = firingsHere();
    } catch (SQLException e) {
      closeQuietly();
      firings = null;
    }
    if (firings == null) {
      long silent = clock.getAsLong() - lastOk;
      if (silent > takeoverMs) {
        String why = "this node could not reach the queue's database for " + silent / 1000
            + " s (another node may take a job over after " + takeoverMs / 1000.0 + " s)";
        jobs.forEach(id -> fence.accept(id, why));
      }
      return;
    }
    lastOk = before;
    for (String id : jobs) {
      if (!firings.contains(id)) {
        fence.accept(id, "another node took this job over (this node's firing of it is gone"
            + " from the queue)");
      }
    }
  }

  private Set<String> firingsHere() throws SQLException {
    if (connection == null) {
      Properties p = new Properties();
      p.setProperty("user", settings.user() == null ? "postgres" : settings.user());
      p.setProperty("password", settings.password() == null ? "" : settings.password());
      p.setProperty("connectTimeout", "2");
      p.setProperty("socketTimeout", "3");
      connection = DriverManager.getConnection(settings.url(), p);
    }
    Set<String> out = new HashSet<>();
    try (PreparedStatement st = connection.prepareStatement("SELECT JOB_NAME FROM "
        + settings.tablePrefix() + "FIRED_TRIGGERS WHERE SCHED_NAME = ? AND INSTANCE_NAME = ?"
        + " AND JOB_GROUP = ?")) {
      st.setQueryTimeout(3);
      st.setString(1, QueueSettings.SCHEDULER_NAME);
      st.setString(2, node);
      st.setString(3, Queue.GROUP);
      try (ResultSet rs = st.executeQuery()) {
        while (rs.next()) {
          out.add(rs.getString(1));
        }
      }
    }
    return out;
  }

  private void closeQuietly() {
    try {
      if (connection != null) {
        connection.close();
      }
    } catch (SQLException ignored) {
      // a broken connection is dropped either way
    }
    connection = null;
  }

  @Override
  public void close() {
    closeQuietly();
  }
}
