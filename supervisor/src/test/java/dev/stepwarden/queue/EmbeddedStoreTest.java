package dev.stepwarden.queue;

import static org.assertj.core.api.Assertions.assertThat;

import java.io.IOException;
import java.net.URI;
import java.net.http.HttpClient;
import java.net.http.HttpRequest;
import java.net.http.HttpResponse;
import java.nio.file.Files;
import java.nio.file.Path;
import java.nio.file.attribute.PosixFilePermission;
import java.util.ArrayList;
import java.util.HashSet;
import java.util.List;
import java.util.Set;
import java.util.concurrent.TimeUnit;
import java.util.regex.Matcher;
import java.util.regex.Pattern;
import java.util.stream.Stream;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;
import tools.jackson.databind.JsonNode;
import tools.jackson.databind.json.JsonMapper;

/**
 * The embedded store while a serve holds it: reachable by this user alone, one serve at a time,
 * commands passed to the live serve; and a job that a restarted serve resumes is a full job of
 * its new slot.
 */
class EmbeddedStoreTest {
  private static final Set<PosixFilePermission> GROUP_OTHER = Set.of(
      PosixFilePermission.GROUP_READ, PosixFilePermission.GROUP_WRITE,
      PosixFilePermission.GROUP_EXECUTE, PosixFilePermission.OTHERS_READ,
      PosixFilePermission.OTHERS_WRITE, PosixFilePermission.OTHERS_EXECUTE);

  @TempDir
  Path tmp;

  @Test
  void aServingStoreHasNoListenerPrivateFilesRefusesASecondServeAndAnswersCommands()
      throws Exception {
    Path events = tmp.resolve("events.log");
    Path rules = Fixtures.guardFile(tmp, events, 8, "0.1");
    Path home = tmp.resolve("home");
    String h = home.toString();
    Path log = tmp.resolve("serve.log");
    Process serve = Fixtures.stepwarden(log, "serve", "--home", h, "--slots", "1");
    try {
      assertThat(Fixtures.await(() -> Fixtures.read(log).contains("stepwarden serve: node"),
          90_000)).as("serve is up:\n" + Fixtures.read(log)).isTrue();

      // a command while serve holds the store: passed to serve through the request folder
      String id = Fixtures.cli("queue", "add", "--home", h, "--rules", rules.toString(),
          "--set", "run.name=private").strip();
      assertThat(Fixtures.await(() -> Fixtures.read(log).contains("job " + id + " done"),
          90_000)).as("the job runs:\n" + Fixtures.read(log)).isTrue();
      List<JsonNode> jobs = listJson(h);
      assertThat(jobs).hasSize(1);
      assertThat(jobs.get(0).has("run_dir")).isTrue();
      assertThat(jobs.get(0).get("exit_code").asInt()).isZero();
      assertThat(jobs.get(0).propertyNames()).allSatisfy(k ->
          assertThat(k).as("snake_case key").matches("[a-z]+(_[a-z]+)*"));

      // no listening socket at all, loopback or not (no metrics port was asked for)
      assertThat(listeningSockets(serve.pid())).as("listening sockets of serve").isEmpty();

      // the queue's folder and files: owner only
      assertThat(Files.getPosixFilePermissions(home)).doesNotContainAnyElementsOf(GROUP_OTHER);
      List<Path> files;
      try (Stream<Path> s = Files.walk(home, 2)) {
        files = s.filter(p -> !p.startsWith(home.resolve("runs").resolve(id))).toList();
      }
      assertThat(files).extracting(p -> p.getFileName().toString())
          .contains("queue.mv.db", "queue.lock", "serve-audit.jsonl", "requests", "runs");
      for (Path p : files) {
        assertThat(Files.getPosixFilePermissions(p)).as(p.toString())
            .doesNotContainAnyElementsOf(GROUP_OTHER);
      }

      // a second serve on the same store: refused at once, naming the live one
      Path log2 = tmp.resolve("second.log");
      long t0 = System.nanoTime();
      Process second = Fixtures.stepwarden(log2, "serve", "--home", h, "--slots", "1");
      assertThat(second.waitFor(30, TimeUnit.SECONDS)).as("the second serve exits").isTrue();
      double seconds = (System.nanoTime() - t0) / 1e9;
      assertThat(second.exitValue()).isEqualTo(2);
      assertThat(Fixtures.read(log2)).contains("another serve holds the queue in " + home)
          .contains("pid " + serve.pid());
      System.out.printf("second serve refused after %.2f s (JVM start included)%n", seconds);
      assertThat(Fixtures.read(log)).as("the live serve goes on").doesNotContain("stopping");
    } finally {
      serve.destroy();
      serve.waitFor(20, TimeUnit.SECONDS);
      serve.destroyForcibly();
    }
    assertThat(serve.exitValue()).isEqualTo(143);
    assertThat(Fixtures.read(log)).doesNotContain("class loader").doesNotContain("could not");
  }

  @Test
  void aMissingOrEmptyStoreIsReportedWhereAQueueExistedBefore() throws Exception {
    Path rules = Fixtures.guardFile(tmp, tmp.resolve("events.log"), 1, "0");
    String h = tmp.resolve("home").toString();
    Fixtures.cli("queue", "add", "--home", h, "--rules", rules.toString(), "--at", "23:59");
    Path db = tmp.resolve("home").resolve("queue.mv.db");
    Files.write(db, new byte[0]); // what a full disk or a careless copy leaves behind
    String empty = Fixtures.failing(2, "queue", "list", "--home", h);
    assertThat(empty).contains("the queue database " + db + " is empty")
        .contains("restore queue.mv.db from a backup");
    Files.delete(db);
    assertThat(Fixtures.failing(2, "serve", "--home", h)).contains(db + " is missing");
    assertThat(db).doesNotExist(); // nothing was silently recreated
  }

  @Test
  void aJobResumedByARestartedServeGetsItsNewSlotsGpusAndIsAFullJob() throws Exception {
    Path events = tmp.resolve("events.log");
    Path rules = Fixtures.guardFile(tmp, events, 40, "0.2");
    Path home = tmp.resolve("home");
    String h = home.toString();
    String id = Fixtures.cli("queue", "add", "--home", h, "--rules", rules.toString(),
        "--set", "run.name=moved").strip();
    Path metrics = home.resolve("runs").resolve(id).resolve("metrics.jsonl");

    Path log1 = tmp.resolve("serve1.log");
    Process first = Fixtures.stepwarden(log1, "serve", "--home", h, "--gpus", "3");
    try {
      assertThat(Fixtures.await(() -> Fixtures.read(metrics).lines().count() >= 3, 90_000))
          .as("the job runs on GPU 3:\n" + Fixtures.read(log1)).isTrue();
      first.destroy(); // SIGTERM: the job is stopped and kept for the next serve
      assertThat(first.waitFor(30, TimeUnit.SECONDS)).isTrue();
      assertThat(first.exitValue()).isEqualTo(143);
    } finally {
      first.destroyForcibly();
    }
    assertThat(Fixtures.read(log1)).doesNotContain("class loader").doesNotContain("could not");

    Path log2 = tmp.resolve("serve2.log");
    Process second = Fixtures.stepwarden(log2, "serve", "--home", h, "--gpus", "5",
        "--metrics-port", "0");
    try {
      long before = Fixtures.read(metrics).lines().count();
      assertThat(Fixtures.await(() -> Fixtures.read(metrics).lines().count() >= before + 2,
          90_000)).as("the job resumes:\n" + Fixtures.read(log2)).isTrue();
      String page = scrape(log2);
      assertThat(page).contains("stepwarden_learning_rate{run=\"" + id + "\"}")
          .contains("stepwarden_queue_jobs{state=\"running\"} 1.0")
          .contains("stepwarden_queue_slots_busy 1.0")
          .contains("stepwarden_build_info{");
      assertThat(listeningSockets(second.pid())).as("only the loopback metrics port")
          .allSatisfy(a -> assertThat(a).startsWith("127.0.0.1:"));

      Fixtures.cli("queue", "cancel", "--home", h, id); // cancel reaches a resumed job
      assertThat(Fixtures.await(() -> Fixtures.read(log2).contains("job " + id + " cancelled"),
          90_000)).as("cancelled:\n" + Fixtures.read(log2)).isTrue();
    } finally {
      second.destroy();
      second.waitFor(20, TimeUnit.SECONDS);
      second.destroyForcibly();
    }
    List<String[]> starts = Fixtures.events(events).stream().filter(e -> e[0].equals("start"))
        .toList();
    assertThat(starts).extracting(e -> e[2]).containsExactly("3", "5");
    // quiet: the trainer's lines go to its run directory, not to serve's output
    assertThat(Fixtures.read(log2)).doesNotContain("\"loss\"");
    assertThat(listJson(h).get(0).get("status").asString()).isEqualTo("cancelled");
  }

  static List<JsonNode> listJson(String home) {
    JsonMapper json = JsonMapper.builder().build();
    return Fixtures.cli("queue", "list", "--home", home, "--json").lines().map(json::readTree)
        .toList();
  }

  static String scrape(Path log) throws Exception {
    Matcher m = Pattern.compile("metrics on (http://\\S+/metrics)").matcher(Fixtures.read(log));
    assertThat(m.find()).as("metrics address in:\n" + Fixtures.read(log)).isTrue();
    return HttpClient.newHttpClient().send(HttpRequest.newBuilder(URI.create(m.group(1)))
        .build(), HttpResponse.BodyHandlers.ofString()).body();
  }

  /**
   * The local addresses of the TCP sockets {@code pid} listens on, from /proc: its socket inodes
   * (/proc/PID/fd) matched against the kernel's socket tables in state LISTEN (0A).
   */
  static List<String> listeningSockets(long pid) throws IOException {
    Set<String> inodes = new HashSet<>();
    try (Stream<Path> fds = Files.list(Path.of("/proc", Long.toString(pid), "fd"))) {
      for (Path fd : fds.toList()) {
        try {
          String target = Files.readSymbolicLink(fd).toString();
          if (target.startsWith("socket:[")) {
            inodes.add(target.substring(8, target.length() - 1));
          }
        } catch (IOException closedMeanwhile) {
          // the descriptor went away while listing
        }
      }
    }
    List<String> out = new ArrayList<>();
    for (String table : List.of("tcp", "tcp6")) {
      Path p = Path.of("/proc", Long.toString(pid), "net", table);
      if (!Files.exists(p)) {
        continue;
      }
      for (String line : Files.readAllLines(p).subList(1, Files.readAllLines(p).size())) {
        String[] f = line.strip().split("\\s+");
        if (f[3].equals("0A") && inodes.contains(f[9])) {
          out.add(address(f[1]));
        }
      }
    }
    return out;
  }

  /**
   * /proc's hex "0100007F:1F90" as "127.0.0.1:8080"; an IPv4-mapped IPv6 address as its IPv4
   * address, IPv6 loopback as "::1", other IPv6 addresses as hex.
   */
  static String address(String hex) {
    String[] p = hex.split(":");
    int port = Integer.parseInt(p[1], 16);
    if (p[0].length() == 32 && p[0].startsWith("0000000000000000FFFF0000")) {
      p[0] = p[0].substring(24);
    } else if (p[0].equals("00000000000000000000000001000000")) {
      return "::1:" + port;
    }
    if (p[0].length() == 8) {
      long a = Long.parseLong(p[0], 16);
      return (a & 0xff) + "." + (a >> 8 & 0xff) + "." + (a >> 16 & 0xff) + "." + (a >> 24 & 0xff)
          + ":" + port;
    }
    return p[0] + ":" + port;
  }
}
