package dev.stepwarden.cli;

import static org.assertj.core.api.Assertions.assertThat;

import java.io.PrintWriter;
import java.io.StringWriter;
import java.net.URL;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.ArrayList;
import java.util.LinkedHashMap;
import java.util.List;
import java.util.Map;
import java.util.Objects;
import java.util.stream.Stream;
import org.assertj.core.api.SoftAssertions;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.io.TempDir;

/**
 * Walks the corpus of broken guard files in {@code src/test/resources/hardening/bad} through
 * {@code stepwarden check}, exactly as a user runs it. Each file has one row in
 * {@code expectations.tsv}: the line:column the message must name and a fragment it must contain.
 * A 10 MB file is generated here rather than committed.
 */
class BadGuardFileCorpusTest {
  @TempDir
  Path tmp;

  private record Outcome(int code, String out, String err, long nanos) {}

  private static Outcome check(Path file) {
    StringWriter out = new StringWriter();
    StringWriter err = new StringWriter();
    long t0 = System.nanoTime();
    int code = Main.execute(new String[] {"check", file.toString()}, new PrintWriter(out, true),
        new PrintWriter(err, true));
    return new Outcome(code, out.toString(), err.toString(), System.nanoTime() - t0);
  }

  private static Path corpus() throws Exception {
    URL u = Objects.requireNonNull(BadGuardFileCorpusTest.class.getResource(
        "/hardening/bad/expectations.tsv"));
    return Path.of(u.toURI()).getParent();
  }

  @Test
  void everyBrokenGuardFileIsRefusedWithExit78LineColumnAndAPlainMessage() throws Exception {
    Path dir = corpus();
    Map<String, String[]> table = new LinkedHashMap<>();
    for (String row : Files.readAllLines(dir.resolve("expectations.tsv"))) {
      if (!row.isBlank() && !row.startsWith("#")) {
        String[] f = row.split("\t");
        table.put(f[0], new String[] {f[1], f[2]});
      }
    }
    List<String> files;
    try (Stream<Path> s = Files.list(dir)) {
      files = s.map(p -> p.getFileName().toString()).filter(n -> n.endsWith(".yaml")).sorted()
          .toList();
    }
    assertThat(files).as("every corpus file has a row and every row a file")
        .containsExactlyInAnyOrderElementsOf(table.keySet());

    // The 10 MB file: generated, well-formed YAML, refused on size before it is parsed.
    Path big = tmp.resolve("huge.yaml");
    StringBuilder sb = new StringBuilder("run:\n  learning_rate: 0.1\n  env:\n");
    for (int i = 0; sb.length() < 10 << 20; i++) {
      sb.append("    K").append(i).append(": \"").append("x".repeat(200)).append("\"\n");
    }
    Files.writeString(big, sb, StandardCharsets.UTF_8);
    List<Path> all = new ArrayList<>();
    files.forEach(f -> all.add(dir.resolve(f)));
    all.add(big);
    table.put("huge.yaml", new String[] {"1:1", "a guard file may be at most 1048576 bytes"});

    SoftAssertions soft = new SoftAssertions();
    for (Path f : all) {
      String name = f.getFileName().toString();
      String[] want = table.get(name);
      Outcome o = check(f);
      String msg = o.err.strip();
      soft.assertThat(o.code).as(name + " exit code").isEqualTo(ExitCodes.CONFIG);
      soft.assertThat(o.out).as(name + " stdout").isEmpty();
      soft.assertThat(msg.lines().count()).as(name + " one line: " + msg).isEqualTo(1);
      soft.assertThat(msg).as(name).startsWith(f + ":" + want[0] + ": ");
      soft.assertThat(msg).as(name).contains(want[1]);
      soft.assertThat(msg).as(name + " no stack trace").doesNotContain("Exception")
          .doesNotContain("\tat ").doesNotContain("internal error");
    }
    soft.assertAll();
    System.out.printf("corpus: %d broken guard files (incl. a generated %d MB one), all exit 78"
        + " with file:line:col%n", all.size(), Files.size(big) >> 20);
  }

  @Test
  void aliasBombIsRefusedAtItsFirstAnchorWellUnderASecond() throws Exception {
    // Nine levels of nine aliases: 9^9 (387 million) scalars if anything expanded it.
    Path bomb = corpus().resolve("15-alias-bomb.yaml");
    check(bomb); // warm the loader's classes so the figure is the refusal, not class loading
    Outcome o = check(bomb);
    assertThat(o.code).isEqualTo(ExitCodes.CONFIG);
    assertThat(o.err).contains(":1:4: YAML anchors (&a) are not accepted");
    System.out.printf("alias bomb (9^9 scalars if expanded) refused in %.2f ms%n",
        o.nanos / 1e6);
  }
}
