package dev.stepwarden.demo;

import java.io.ByteArrayOutputStream;
import java.io.OutputStream;
import java.io.PrintStream;
import java.nio.charset.StandardCharsets;
import java.util.ArrayList;
import java.util.List;
import java.util.Map;
import java.util.function.Consumer;
import tools.jackson.databind.JsonNode;
import tools.jackson.databind.json.JsonMapper;

/** Runs {@link DemoTrainer#run} in-process and keeps what it printed. */
final class TrainerRun {
  final int exitCode;
  final List<String> lines;
  final String stderr;

  private TrainerRun(int exitCode, List<String> lines, String stderr) {
    this.exitCode = exitCode;
    this.lines = lines;
    this.stderr = stderr;
  }

  static TrainerRun of(String... args) {
    return of(Map.of(), line -> {}, args);
  }

  /** {@code onLine} sees each stdout line as soon as the trainer prints it (before the next step). */
  static TrainerRun of(Map<String, String> env, Consumer<String> onLine, String... args) {
    LineStream lines = new LineStream(onLine);
    ByteArrayOutputStream err = new ByteArrayOutputStream();
    int code;
    try (PrintStream out = new PrintStream(lines, true, StandardCharsets.UTF_8);
        PrintStream errStream = new PrintStream(err, true, StandardCharsets.UTF_8)) {
      code = DemoTrainer.run(args, env, out, errStream);
    }
    return new TrainerRun(code, lines.lines, err.toString(StandardCharsets.UTF_8));
  }

  List<JsonNode> json() {
    return lines.stream().map(l -> JsonMapper.shared().readTree(l)).toList();
  }

  List<JsonNode> stepLines() {
    return json().stream().filter(n -> n.has("loss")).toList();
  }

  List<JsonNode> evalLines() {
    return json().stream().filter(n -> n.has("val_loss")).toList();
  }

  private static final class LineStream extends OutputStream {
    final List<String> lines = new ArrayList<>();
    private final ByteArrayOutputStream current = new ByteArrayOutputStream();
    private final Consumer<String> onLine;

    LineStream(Consumer<String> onLine) {
      this.onLine = onLine;
    }

    @Override
    public void write(int b) {
      if (b == '\n') {
        String line = current.toString(StandardCharsets.UTF_8);
        current.reset();
        lines.add(line);
        onLine.accept(line);
      } else if (b != '\r') {
        current.write(b);
      }
    }
  }
}
