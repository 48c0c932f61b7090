package dev.stepwarden.queue;

import static org.assertj.core.api.Assertions.assertThat;
import static org.junit.jupiter.api.Assumptions.assumeTrue;

import java.nio.file.Path;
import java.sql.Connection;
import java.sql.DriverManager;
import java.sql.ResultSet;
import java.sql.Statement;
import java.time.Duration;
import java.util.ArrayList;
import java.util.List;
import java.util.Map;
import java.util.concurrent.ThreadLocalRandom;
import java.util.concurrent.TimeUnit;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;

/** Two serve JVMs share one queue in the local PostgreSQL; one dies, the other takes over. */
class ClusterFailoverTest {
  static final String URL = System.getProperty("stepwarden.pgUrl",
      "jdbc:postgresql://127.0.0.1:5432/test");

  @TempDir
  Path tmp;

  static boolean reachable() {
    try (Connection c = DriverManager.getConnection(URL + "?connectTimeout=2", "postgres", "")) {
      return c.isValid(2);
    } catch (Exception e) {
      System.err.println("SKIP ClusterFailoverTest: no PostgreSQL at " + URL + " ("
          + e.getMessage() + "); start it, e.g. pg_ctlcluster <version> main start");
      return false;
    }
  }

  @Test
  void aLiveNodeTakesOverTheJobOfAKilledNodeAndFinishesIt() throws Exception {
    assumeTrue(reachable(), "no PostgreSQL reachable at " + URL);
    String prefix = "SWT" + Long.toHexString(ThreadLocalRandom.current().nextLong() >>> 24)
        .toUpperCase() + "_";
    Path events = tmp.resolve("events.log");
    Path rules = Fixtures.guardFile(tmp, events, 20, "0.2");
    Path runs = tmp.resolve("shared-runs");
    QueueSettings client = new QueueSettings(tmp.resolve("client"), URL, "postgres", "", prefix,
        true, Duration.ofSeconds(1), runs);
    List<Process> nodes = new ArrayList<>();
    List<Path> logs = new ArrayList<>();
    try {
      String id;
      try (Queue q = Queue.open(client)) {
        id = q.add(new JobRequest(rules, null, null, 5, null, Map.of("run.name", "failover"),
            null, tmp));
      }
      for (int i = 0; i < 2; i++) {
        Path log = tmp.resolve("node" + i + ".log");
        logs.add(log);
        nodes.add(Fixtures.stepwarden(log, "serve", "--home", tmp.resolve("node" + i).toString(),
            "--db", URL, "--db-user", "postgres", "--table-prefix", prefix, "--cluster",
            "--checkin", "1s", "--runs", runs.toString(), "--slots", "1"));
      }
      String started = "job " + id + " started on slot 0";
      assertThat(Fixtures.await(() -> logs.stream().anyMatch(l -> Fixtures.read(l)
          .contains(started)) && Fixtures.read(runs.resolve(id).resolve("metrics.jsonl"))
          .lines().count() >= 2, 25_000)).as("a node starts the job:\n" + Fixtures.read(
          logs.get(0)) + Fixtures.read(logs.get(1))).isTrue();
      int victim = Fixtures.read(logs.get(0)).contains(started) ? 0 : 1;
      int survivor = 1 - victim;
      nodes.get(victim).destroyForcibly();
      assertThat(nodes.get(victim).waitFor(10, TimeUnit.SECONDS)).isTrue();

      Path log = logs.get(survivor);
      assertThat(Fixtures.await(() -> Fixtures.read(log).contains("job " + id + " done"),
          28_000)).as("the survivor finishes it:\n" + Fixtures.read(log)).isTrue();
      assertThat(Fixtures.read(log)).contains(started + " (recovering a run whose serve died)");
      try (Queue q = Queue.open(client)) {
        JobView v = q.get(id);
        assertThat(v.status()).isEqualTo("done");
        assertThat(v.outcome()).isEqualTo("finished");
      }
      assertThat(Fixtures.events(events).stream().filter(e -> e[0].equals("end"))).hasSize(1);
    } finally {
      for (Process p : nodes) {
        p.destroyForcibly();
        p.waitFor(10, TimeUnit.SECONDS);
      }
      dropTables(prefix);
    }
  }

  static void dropTables(String prefix) throws Exception {
    try (Connection c = DriverManager.getConnection(URL, "postgres", "");
        Statement st = c.createStatement()) {
      List<String> tables = new ArrayList<>();
      try (ResultSet rs = c.getMetaData().getTables(null, null, prefix.toLowerCase() + "%",
          new String[] {"TABLE"})) {
        while (rs.next()) {
          tables.add(rs.getString("TABLE_NAME"));
        }
      }
      for (String t : tables) {
        st.execute("DROP TABLE IF EXISTS " + t + " CASCADE");
      }
    }
  }
}
