package dev.stepwarden.queue;

import static org.assertj.core.api.Assertions.assertThat;

import dev.stepwarden.cli.Main;
import java.io.PrintWriter;
import java.io.StringWriter;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.ArrayList;
import java.util.List;
import org.junit.jupiter.api.Test;
import tools.jackson.databind.JsonNode;
import tools.jackson.databind.json.JsonMapper;
import tools.jackson.dataformat.yaml.YAMLMapper;

/**
 * No container engine runs here: these checks read docker/Dockerfile and docker/compose.yaml and
 * make sure the stepwarden command lines in them parse against the real CLI. Building the image
 * and starting the cluster stay untested.
 */
class ContainerFilesTest {
  static final Path DOCKER = Path.of("..", "docker");

  /** Parses a command line with picocli (without running it) and returns the subcommand path. */
  static List<String> parse(List<String> args) {
    var cl = Main.commandLine();
    var parsed = cl.parseArgs(args.toArray(String[]::new));
    List<String> names = new ArrayList<>();
    for (var p = parsed; p != null; p = p.subcommand()) {
      names.add(p.commandSpec().name());
    }
    return names;
  }

  @Test
  void dockerfileIsMultiStageNonRootWithTiniAndAnExecFormEntrypointOfARealCommand()
      throws Exception {
    List<String> lines = Files.readAllLines(DOCKER.resolve("Dockerfile"));
    assertThat(lines.stream().filter(l -> l.startsWith("FROM "))).hasSize(2);
    assertThat(lines).anyMatch(l -> l.matches("FROM .* AS build"))
        .anyMatch(l -> l.startsWith("COPY --from=build"))
        .anyMatch(l -> l.startsWith("USER stepwarden"))
        .anyMatch(l -> l.startsWith("VOLUME "));
    JsonMapper json = JsonMapper.builder().build();
    String entry = lines.stream().filter(l -> l.startsWith("ENTRYPOINT ")).findFirst()
        .orElseThrow().substring("ENTRYPOINT ".length());
    List<String> ep = new ArrayList<>();
    json.readTree(entry).forEach(n -> ep.add(n.asString())); // exec form is a JSON array
    assertThat(ep).startsWith("/usr/bin/tini", "--", "java", "-jar");
    List<String> cmd = new ArrayList<>();
    json.readTree(lines.stream().filter(l -> l.startsWith("CMD ")).findFirst().orElseThrow()
        .substring(4)).forEach(n -> cmd.add(n.asString()));
    assertThat(parse(cmd)).containsExactly("stepwarden", "serve");
  }

  @Test
  void composeHasPostgresAndTwoServeNodesWhoseCommandsParse() throws Exception {
    JsonNode compose = YAMLMapper.builder().build().readTree(
        Files.readString(DOCKER.resolve("compose.yaml")));
    JsonNode services = compose.get("services");
    assertThat(services.get("db").get("image").asString()).startsWith("postgres:");
    int nodes = 0;
    for (String name : List.of("node-a", "node-b")) {
      List<String> cmd = new ArrayList<>();
      services.get(name).get("command").forEach(n -> cmd.add(n.asString()));
      assertThat(parse(cmd)).containsExactly("stepwarden", "serve");
      assertThat(cmd).contains("--cluster").anyMatch(a -> a.startsWith("jdbc:postgresql://db:"));
      nodes++;
    }
    assertThat(nodes).isEqualTo(2);
    // either node may run or take over any job: both see the runs, the guard files and the
    // trainer's folder at the same paths
    List<String> mountsA = new ArrayList<>();
    services.get("node-a").get("volumes").forEach(n -> mountsA.add(n.asString()));
    List<String> mountsB = new ArrayList<>();
    services.get("node-b").get("volumes").forEach(n -> mountsB.add(n.asString()));
    assertThat(mountsA).isEqualTo(mountsB).anyMatch(m -> m.contains(":/var/lib/stepwarden/runs"))
        .anyMatch(m -> m.contains("/guards:")).anyMatch(m -> m.contains("/trainer:"));
    // the `queue add` shown in the file's comment is a real command too
    String comment = Files.readAllLines(DOCKER.resolve("compose.yaml")).stream()
        .filter(l -> l.startsWith("#")).map(l -> l.substring(1).strip().replace("\\", ""))
        .reduce("", (a, b) -> a + " " + b);
    String add = comment.substring(comment.indexOf("queue add"));
    assertThat(parse(List.of(add.strip().split("\\s+")))).containsExactly("stepwarden", "queue",
        "add");
    StringWriter sink = new StringWriter();
    assertThat(Main.execute(new String[] {"serve", "--help"}, new PrintWriter(sink),
        new PrintWriter(sink))).isZero();
  }
}
