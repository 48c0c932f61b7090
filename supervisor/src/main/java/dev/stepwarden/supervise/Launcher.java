package dev.stepwarden.supervise;

import dev.stepwarden.process.LaunchSpec;
import dev.stepwarden.process.LineBatchListener;
import dev.stepwarden.process.TrainerProcess;
import dev.stepwarden.rules.GuardFile;
import dev.stepwarden.rules.GuardFiles;
import java.io.IOException;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.nio.file.StandardOpenOption;
import java.util.ArrayList;
import java.util.LinkedHashMap;
import java.util.List;
import java.util.Map;
import java.util.regex.Matcher;
import java.util.regex.Pattern;
import tools.jackson.databind.json.JsonMapper;

/**
 * Starts one generation's trainer: fills the command's placeholders, adds the control-file
 * environment, writes {@code command.json} (the exact argv, working directory and environment)
 * and starts the process with its output going to the run directory's logs.
 */
final class Launcher {
  private static final JsonMapper JSON = JsonMapper.builder().build();
  private static final Pattern PLACEHOLDER = Pattern.compile("\\{([a-z_]+)}");

  /** A started trainer and the argv it got. */
  record Launched(TrainerProcess trainer, List<String> argv) {}

  private final RunDirectory dir;
  private final GuardFile rules;
  private final Path workdir;
  private final boolean quiet;
  private final Path control;

  Launcher(RunDirectory dir, GuardFile rules, Path workdir, boolean quiet, Path control) {
    this.dir = dir;
    this.rules = rules;
    this.workdir = workdir;
    this.quiet = quiet;
    this.control = control;
  }

  Launched start(double rate, String resumeFrom, int skipBatches, int attempt,
      LineBatchListener listener) throws IOException {
    Map<String, String> values = new LinkedHashMap<>();
    values.put("learning_rate", formatRate(rate));
    values.put("resume_from", resumeFrom);
    values.put("skip_batches", Integer.toString(skipBatches));
    values.put("attempt", Integer.toString(attempt));
    values.put("run_dir", dir.root().toString());
    List<String> argv = new ArrayList<>();
    for (String word : rules.run().command()) {
      argv.add(fill(word, values));
    }
    Map<String, String> env = new LinkedHashMap<>(rules.run().env());
    env.put("STEPWARDEN_CONTROL", control.toString());
    env.put("STEPWARDEN_RUN_DIR", dir.root().toString());
    Map<String, Object> cmd = new LinkedHashMap<>();
    cmd.put("argv", argv);
    cmd.put("workdir", workdir.toString());
    cmd.put("env", env);
    cmd.put("attempt", attempt);
    Files.writeString(dir.privateFile(RunDirectory.COMMAND), JSON.writeValueAsString(cmd) + "\n",
        StandardCharsets.UTF_8, StandardOpenOption.TRUNCATE_EXISTING, StandardOpenOption.WRITE);
    LaunchSpec spec = LaunchSpec.builder()
        .command(argv)
        .workingDirectory(workdir)
        .environment(env)
        .stdoutLog(dir.privateFile(RunDirectory.STDOUT))
        .stderrLog(dir.privateFile(RunDirectory.STDERR))
        .echo(!quiet)
        .stopGrace(rules.run().stopGrace())
        .maxLineChars(rules.read().lineLimit())
        .build();
    return new Launched(TrainerProcess.start(spec, listener), argv);
  }

  /** Fills {@code {name}} placeholders; the values are numbers and paths we produced ourselves. */
  static String fill(String word, Map<String, String> values) {
    // One pass over the template only: a value (a checkpoint path, say) that itself contains
    // "{attempt}" or shell characters is passed on verbatim, never expanded again.
    Matcher m = PLACEHOLDER.matcher(word);
    StringBuilder out = new StringBuilder();
    while (m.find()) {
      String name = m.group(1);
      String value = GuardFiles.PLACEHOLDERS.contains(name) ? values.getOrDefault(name, "")
          : m.group();
      m.appendReplacement(out, Matcher.quoteReplacement(value));
    }
    m.appendTail(out);
    return out.toString();
  }

  /** The rate as {@code {learning_rate}} gets it: shortest text that parses back exactly. */
  static String formatRate(double rate) {
    return Double.toString(rate);
  }
}
