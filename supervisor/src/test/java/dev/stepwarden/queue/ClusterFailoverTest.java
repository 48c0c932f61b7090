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
import tools.jackson.databind.json.JsonMapper;

/**
 * Two serve JVMs share one queue in the local PostgreSQL (127.0.0.1:5432, trust login as
 * postgres, database {@code test}; .ci/run starts it). Without it these tests skip, saying why.
 */
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
          .lines().count() >= 2, 90_000)).as("a node starts the job:\n" + Fixtures.read(
          logs.get(0)) + Fixtures.read(logs.get(1))).isTrue();
      int victim = Fixtures.read(logs.get(0)).contains(started) ? 0 : 1;
      int survivor = 1 - victim;
      nodes.get(victim).destroyForcibly();
      assertThat(nodes.get(victim).waitFor(10, TimeUnit.SECONDS)).isTrue();

      Path log = logs.get(survivor);
      assertThat(Fixtures.await(() -> Fixtures.read(log).contains("job " + id + " done"),
          90_000)).as("the survivor finishes it:\n" + Fixtures.read(log)).isTrue();
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

  @Test
  void aFrozenNodeStopsItsTrainerWhenItWakesAndTheRunKeepsOneUnbrokenAuditSequence()
      throws Exception {
    assumeTrue(reachable(), "no PostgreSQL reachable at " + URL);
    String prefix = "SWT" + Long.toHexString(ThreadLocalRandom.current().nextLong() >>> 24)
        .toUpperCase() + "_";
    Path events = tmp.resolve("events.log");
    // long enough to outlast the freeze on a loaded machine; node B's resumed run is cancelled
    Path rules = Fixtures.guardFile(tmp, events, 900, "0.1");
    Path runs = tmp.resolve("shared-runs");
    QueueSettings client = new QueueSettings(tmp.resolve("client"), URL, "postgres", "", prefix,
        true, Duration.ofSeconds(1), runs);
    Path logA = tmp.resolve("nodeA.log");
    Path logB = tmp.resolve("nodeB.log");
    List<Process> nodes = new ArrayList<>();
    try {
      String id;
      try (Queue q = Queue.open(client)) {
        id = q.add(new JobRequest(rules, null, null, 5, null, Map.of("run.name", "frozen"),
            null, tmp));
      }
      Path audit = runs.resolve(id).resolve("audit.jsonl");
      Process a = node(logA, "A", prefix, runs);
      nodes.add(a);
      assertThat(Fixtures.await(() -> Fixtures.read(runs.resolve(id).resolve("metrics.jsonl"))
          .lines().count() >= 3, 90_000)).as("node A runs the job:\n" + Fixtures.read(logA))
          .isTrue();
      Process b = node(logB, "B", prefix, runs);
      nodes.add(b);
      assertThat(Fixtures.await(() -> Fixtures.read(logB).contains("stepwarden serve: node"),
          90_000)).as("node B is up:\n" + Fixtures.read(logB)).isTrue();
      long trainerA = Long.parseLong(Fixtures.events(events).get(0)[3]);

      signal("STOP", a.pid()); // a frozen VM: no check-in, while its trainer goes on
      assertThat(Fixtures.await(() -> Fixtures.read(logB).contains("job " + id
          + " waits for its run directory"), 90_000))
          .as("node B takes the job over and waits for the run directory:\n"
              + Fixtures.read(logB)).isTrue();
      assertThat(ProcessHandle.of(trainerA).map(ProcessHandle::isAlive).orElse(false))
          .as("A's trainer still runs while A is frozen").isTrue();
      long woke = System.nanoTime();
      signal("CONT", a.pid());
      assertThat(Fixtures.await(() -> !ProcessHandle.of(trainerA).map(ProcessHandle::isAlive)
          .orElse(false), 15_000)).as("A stops its trainer once awake:\n" + Fixtures.read(logA))
          .isTrue();
      double stoppedAfter = (System.nanoTime() - woke) / 1e9;
      System.out.printf("frozen node's trainer stopped %.2f s after SIGCONT%n", stoppedAfter);
      assertThat(stoppedAfter).as("within seconds of waking (its grace is 2 s)").isLessThan(10);

      // node B gets the run directory once A let go, and resumes the run there
      assertThat(Fixtures.await(() -> Fixtures.read(audit).split("\"type\":\"launch\"", -1)
          .length == 3, 90_000)).as("node B resumes the run:\n" + Fixtures.read(logB)).isTrue();
      try (Queue q = Queue.open(client)) {
        q.cancel(id);
      }
      assertThat(Fixtures.await(() -> Fixtures.read(logB).contains("job " + id + " cancelled"),
          90_000)).as("node B stops it on cancel:\n" + Fixtures.read(logB)).isTrue();
      assertThat(Fixtures.read(logA)).contains("job " + id + " given up here");
      assertThat(Fixtures.events(events).stream().filter(e -> e[0].equals("end")))
          .as("no trainer ran to its end").isEmpty();

      // one unbroken audit sequence: 1, 2, 3, ... with no number twice and none missing
      JsonMapper json = JsonMapper.builder().build();
      List<Long> seqs = Fixtures.read(audit).lines().filter(l -> !l.isBlank())
          .map(l -> json.readTree(l).get("seq").asLong()).toList();
      for (int i = 0; i < seqs.size(); i++) {
        assertThat(seqs.get(i)).as("audit record " + (i + 1)).isEqualTo(i + 1L);
      }
      assertThat(Fixtures.read(audit)).contains("\"signal\":\"fenced: another node took this job"
          + " over");
      try (Queue q = Queue.open(client)) {
        assertThat(q.get(id).status()).isEqualTo("cancelled");
      }
    } finally {
      for (Process p : nodes) {
        signal("CONT", p.pid());
        p.destroyForcibly();
        p.waitFor(10, TimeUnit.SECONDS);
      }
      dropTables(prefix);
    }
  }

  private Process node(Path log, String name, String prefix, Path runs) throws Exception {
    return Fixtures.stepwarden(log, "serve", "--home", tmp.resolve("node" + name).toString(),
        "--db", URL, "--db-user", "postgres", "--table-prefix", prefix, "--cluster",
        "--checkin", "1s", "--runs", runs.toString(), "--slots", "1");
  }

  private static void signal(String name, long pid) throws Exception {
    new ProcessBuilder("kill", "-" + name, Long.toString(pid)).inheritIO().start().waitFor();
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
