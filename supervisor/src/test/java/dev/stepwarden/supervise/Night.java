package dev.stepwarden.supervise;

import dev.stepwarden.audit.AuditReader;
import dev.stepwarden.control.ControlFile;
import dev.stepwarden.rules.GuardFile;
import dev.stepwarden.rules.GuardFiles;
import java.io.ByteArrayOutputStream;
import java.io.IOException;
import java.io.InputStream;
import java.io.PrintStream;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.List;
import java.util.Map;
import java.util.Objects;

/** Test scaffolding: a work folder with the toy trainer and the Python helper, and audit reading. */
final class Night {
  final Path work;
  final Path runDir;

  Night(Path tmp) throws IOException {
    work = Files.createDirectories(tmp.resolve("work"));
    runDir = tmp.resolve("run");
    copy("/steering/toy_trainer.py", work.resolve("toy_trainer.py"));
    copy(ControlFile.PYTHON_HELPER, work.resolve("stepwarden_control.py"));
  }

  static void copy(String resource, Path to) throws IOException {
    try (InputStream in = Objects.requireNonNull(Night.class.getResourceAsStream(resource),
        resource)) {
      Files.write(to, in.readAllBytes());
    }
  }

  /** Writes a guard file whose run section starts the toy trainer in {@link #work}. */
  GuardFile rules(String trainerArgs, String rest) throws Exception {
    String yaml = "run:\n"
        + "  name: toy\n"
        + "  workdir: " + work + "\n"
        + "  learning_rate: 0.1\n"
        + "  stop_grace: 2s\n"
        + "  command: [python3, -u, toy_trainer.py, --lr, \"{learning_rate}\", --resume,"
        + " \"{resume_from}\", --attempt, \"{attempt}\", --skip-batches, \"{skip_batches}\""
        + (trainerArgs.isEmpty() ? "" : ", " + trainerArgs) + "]\n"
        + "read:\n  from: stdout\n  format: json\n  step: step\n"
        + "  series: { train: loss, validation: val_loss }\n"
        + rest;
    Path f = work.getParent().resolve("guards.yaml");
    Files.writeString(f, yaml);
    return GuardFiles.load(f);
  }

  Supervisor.Result run(GuardFile g) throws Exception {
    ByteArrayOutputStream console = new ByteArrayOutputStream();
    Supervisor s = new Supervisor(g, new RunOptions(runDir, true, null,
        new PrintStream(console, true, StandardCharsets.UTF_8)));
    return s.run();
  }

  List<Map<String, Object>> audit() throws IOException {
    return audit(runDir);
  }

  static List<Map<String, Object>> audit(Path runDir) throws IOException {
    return AuditReader.read(runDir.resolve(RunDirectory.AUDIT)).records();
  }

  static List<Map<String, Object>> ofType(List<Map<String, Object>> records, String type) {
    return records.stream().filter(r -> type.equals(r.get("type"))).toList();
  }

  static long num(Object o) {
    return ((Number) o).longValue();
  }
}
