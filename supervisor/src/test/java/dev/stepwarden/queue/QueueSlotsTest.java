package dev.stepwarden.queue;

import static org.assertj.core.api.Assertions.assertThat;

import java.io.ByteArrayOutputStream;
import java.io.PrintStream;
import java.nio.charset.StandardCharsets;
import java.nio.file.Path;
import java.util.ArrayList;
import java.util.HashMap;
import java.util.List;
import java.util.Map;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;

class QueueSlotsTest {
  @TempDir
  Path tmp;

  @Test
  void threeJobsOnTwoSlotsRunTwoAtATimeEachWithItsOwnGpuAndAllFinish() throws Exception {
    Path events = tmp.resolve("events.log");
    Path rules = Fixtures.guardFile(tmp, events, 6, "0.25");
    Path home = tmp.resolve("home");
    List<String> ids = new ArrayList<>();
    ByteArrayOutputStream console = new ByteArrayOutputStream();
    try (Queue q = Queue.openForServe(QueueSettings.local(home), 2)) {
      for (int i = 1; i <= 3; i++) {
        ids.add(q.add(new JobRequest(rules, null, null, 5, null,
            Map.of("run.name", "night-" + i), null, tmp)));
      }
      assertThat(q.list()).extracting(JobView::status).containsOnly("waiting");
      Night night = q.serve(new Night.Options(List.of("0", "1"), null,
          new PrintStream(console, true, StandardCharsets.UTF_8), true, null, 3, 0, null));
      try {
        boolean done = Fixtures.await(() -> {
          try {
            return q.list().stream().allMatch(v -> v.status().equals("done"));
          } catch (QueueException e) {
            return false;
          }
        }, 90_000);
        assertThat(done).as("all done; serve said:\n" + console).isTrue();
      } finally {
        night.close();
      }
    }

    // The trainer's own log: at most two at a time, the third after one ended, GPUs distinct.
    int live = 0;
    int most = 0;
    Map<String, String> gpuOfLive = new HashMap<>();
    List<String> order = new ArrayList<>();
    for (String[] e : Fixtures.events(events)) {
      if (e[0].equals("start")) {
        live++;
        assertThat(gpuOfLive.values()).as("a GPU is never shared").doesNotContain(e[2]);
        assertThat(e[2]).isIn("0", "1");
        gpuOfLive.put(e[1], e[2]);
      } else {
        live--;
        gpuOfLive.remove(e[1]);
      }
      most = Math.max(most, live);
      order.add(e[0]);
    }
    assertThat(most).isEqualTo(2);
    assertThat(order).hasSize(6).startsWith("start", "start");
    assertThat(order.lastIndexOf("start")).as("the third job waited for a free slot")
        .isGreaterThan(order.indexOf("end"));

    String list = Fixtures.cli("queue", "list", "--home", home.toString());
    for (String id : ids) {
      assertThat(list).containsPattern(id + "\\s+done\\s+5\\s+finished \\(exit 0\\)");
    }
  }

  @Test
  void aJobAfterAnotherStartsOnlyOnceThatOneEndedAndCancelledJobsNeverStart() throws Exception {
    Path events = tmp.resolve("events.log");
    Path rules = Fixtures.guardFile(tmp, events, 3, "0.2");
    Path home = tmp.resolve("home");
    String first = Fixtures.cli("queue", "add", "--home", home.toString(), "--rules",
        rules.toString(), "--set", "run.name=first").strip();
    String second = Fixtures.cli("queue", "add", "--home", home.toString(), "--rules",
        rules.toString(), "--after", first, "--set", "run.name=second").strip();
    String dropped = Fixtures.cli("queue", "add", "--home", home.toString(), "--rules",
        rules.toString(), "--at", "2099-01-01T00:00:00Z").strip();
    assertThat(Fixtures.cli("queue", "list", "--home", home.toString()))
        .containsPattern(second + "\\s+after " + first);
    assertThat(Fixtures.cli("queue", "cancel", "--home", home.toString(), dropped))
        .contains("cancelled");
    try (Queue q = Queue.openForServe(QueueSettings.local(home), 2)) {
      Night night = q.serve(Night.Options.slots(2));
      try {
        assertThat(Fixtures.await(() -> {
          try {
            return q.get(second).status().equals("done");
          } catch (QueueException e) {
            return false;
          }
        }, 90_000)).isTrue();
        assertThat(q.get(dropped).status()).isEqualTo("cancelled");
      } finally {
        night.close();
      }
    }
    List<String> seen = Fixtures.events(events).stream().map(e -> e[0] + " " + e[1]).toList();
    assertThat(seen).containsExactly("start " + first, "end " + first, "start " + second,
        "end " + second);
  }
}
