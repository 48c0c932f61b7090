package dev.stepwarden.queue;

import static org.assertj.core.api.Assertions.assertThat;

import dev.stepwarden.audit.AuditLog;
import java.io.ByteArrayOutputStream;
import java.io.PrintStream;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.time.Clock;
import java.time.Instant;
import java.util.List;
import java.util.Map;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;

/** Which waiting job runs next, what releases an --after job, and what a restart starts again. */
class QueueOrderTest {
  @TempDir
  Path tmp;

  private final ByteArrayOutputStream console = new ByteArrayOutputStream();

  private Night serve(Queue q, int slots) throws QueueException {
    return q.serve(new Night.Options(java.util.Collections.nCopies(slots, null), null,
        new PrintStream(console, true, StandardCharsets.UTF_8), true, null, 3, 0, null));
  }

  private static String add(Queue q, Path rules, String name, int priority, Instant at,
      String after) throws QueueException {
    return q.add(new JobRequest(rules, at, null, priority, after, Map.of("run.name", name), null,
        null));
  }

  private boolean allEnded(Queue q, int jobs) throws InterruptedException {
    return Fixtures.await(() -> {
      try {
        List<JobView> l = q.list();
        return l.size() == jobs && l.stream().allMatch(v -> Queue.ENDED.contains(v.status()));
      } catch (QueueException e) {
        return false;
      }
    }, 90_000);
  }

  private static List<String> startOrder(Path events) throws Exception {
    return Fixtures.events(events).stream().filter(e -> e[0].equals("start")).map(e -> e[1])
        .toList();
  }

  @Test
  void whenTheSlotFreesTheWaitingJobOfHighestPriorityStartsEvenAnAtJobWhoseTimePassed()
      throws Exception {
    Path events = tmp.resolve("events.log");
    Files.createDirectories(tmp.resolve("long"));
    Files.createDirectories(tmp.resolve("short"));
    Path slow = Fixtures.guardFile(tmp.resolve("long"), events, 8, "0.5");
    Path quick = Fixtures.guardFile(tmp.resolve("short"), events, 1, "0");
    try (Queue q = Queue.openForServe(QueueSettings.local(tmp.resolve("home")), 1)) {
      Night night = serve(q, 1);
      try {
        String blocker = add(q, slow, "blocker", 5, null, null);
        assertThat(Fixtures.await(() -> night.runningHere().contains(blocker), 90_000))
            .as("the blocker runs:\n" + console).isTrue();
        // while the only slot is busy: a low one now, an --at one whose time passes while it
        // waits, then a high and a middle one
        // (the queue orders one priority's jobs by adding time to 100 ms: jobs added closer
        // together tie, so each add here waits out one step)
        String low = add(q, quick, "low", 1, null, null);
        Thread.sleep(Queue.ORDER_STEP_MS + 50);
        String at = add(q, quick, "at", 9, Instant.now().plusMillis(1500), null);
        Thread.sleep(Queue.ORDER_STEP_MS + 50);
        String high = add(q, quick, "high", 9, null, null);
        Thread.sleep(Queue.ORDER_STEP_MS + 50);
        String mid = add(q, quick, "mid", 5, null, null);
        assertThat(allEnded(q, 5)).as("all end:\n" + console).isTrue();
        assertThat(startOrder(events)).containsExactly(blocker, at, high, mid, low);
      } finally {
        night.close();
      }
    }
  }

  @Test
  void anAfterJobIsReleasedByTheEndOfItsJob() throws Exception {
    Path events = tmp.resolve("events.log");
    Path rules = Fixtures.guardFile(tmp, events, 2, "0.2");
    try (Queue q = Queue.openForServe(QueueSettings.local(tmp.resolve("home")), 2)) {
      String first = add(q, rules, "first", 5, null, null);
      String second = add(q, rules, "second", 5, null, first);
      assertThat(q.get(second).status()).isEqualTo("after");
      Night night = serve(q, 2);
      try {
        assertThat(allEnded(q, 2)).as("both end:\n" + console).isTrue();
      } finally {
        night.close();
      }
      assertThat(startOrder(events)).containsExactly(first, second);
      List<String[]> ev = Fixtures.events(events);
      assertThat(ev.get(1)[0]).as("the second starts only after the first ended")
          .isEqualTo("end");
      assertThat(Fixtures.read(tmp.resolve("home").resolve("serve-audit.jsonl")).lines())
          .anyMatch(l -> l.contains("\"type\":\"released\"")
              && l.contains("\"job\":\"" + second + "\""));
    }
  }

  @Test
  void aJobWhoseSupervisorDiedBeforeItsFirstLaunchStartsAgainAndPurgeForgetsItButNotItsRun()
      throws Exception {
    Path events = tmp.resolve("events.log");
    Path rules = Fixtures.guardFile(tmp, events, 2, "0.1");
    Path home = tmp.resolve("home");
    String id;
    try (Queue q = Queue.open(QueueSettings.local(home))) {
      id = add(q, rules, "early", 5, null, null);
    }
    // what a kill -9 in the job's first second leaves: the run's audit began, nothing launched
    Path dir = home.resolve("runs").resolve(id);
    Files.createDirectories(dir);
    try (AuditLog log = AuditLog.open(dir.resolve("audit.jsonl"), Clock.systemUTC())) {
      log.append("run-start", Map.of("name", "early"));
    }
    try (Queue q = Queue.openForServe(QueueSettings.local(home), 1)) {
      Night night = serve(q, 1);
      try {
        assertThat(allEnded(q, 1)).as("it ends:\n" + console).isTrue();
      } finally {
        night.close();
      }
    }
    try (Queue q = Queue.open(QueueSettings.local(home))) {
      JobView v = q.get(id);
      assertThat(v.status()).isEqualTo("done");
      assertThat(v.attempts()).isEqualTo(2);
      assertThat(v.runDir()).endsWith(id + ".2");
    }
    assertThat(Fixtures.read(home.resolve("serve-audit.jsonl"))).contains("\"job-retry\"");
    assertThat(Fixtures.read(dir.resolve("audit.jsonl"))).as("the first attempt is kept")
        .contains("run-start");

    String out = Fixtures.cli("queue", "purge", "--home", home.toString(), "--before",
        Instant.now().plusSeconds(60).toString());
    assertThat(out).contains("forgot 1 ended job(s)");
    assertThat(Fixtures.cli("queue", "list", "--home", home.toString(), "--json")).isBlank();
    assertThat(home.resolve("runs").resolve(id + ".2").resolve("audit.jsonl")).exists();
  }
}
