package dev.stepwarden.demo;

import dev.stepwarden.demo.TrainerOptions.UsageException;
import java.io.BufferedOutputStream;
import java.io.FileDescriptor;
import java.io.FileOutputStream;
import java.io.IOException;
import java.io.PrintStream;
import java.io.UncheckedIOException;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.AccessDeniedException;
import java.nio.file.FileAlreadyExistsException;
import java.nio.file.FileSystemException;
import java.nio.file.NoSuchFileException;
import java.nio.file.Path;
import java.util.Arrays;
import java.util.Locale;
import java.util.Map;

/**
 * The bundled demo trainer: a real, small neural network trained by mini-batch SGD, launched by the
 * supervisor as its own JVM ({@code java -cp stepwarden.jar dev.stepwarden.demo.DemoTrainer ...})
 * so that {@code stepwarden demo} shows a whole supervised night in well under a minute.
 *
 * <p>Design note. The trainer behaves like the user programs stepwarden supervises and knows
 * nothing of the supervisor beyond the public protocol:
 *
 * <ul>
 *   <li><b>Data</b>: invented greenhouse-controller readings ({@link GreenhouseData}: 8 sensors,
 *       actions vent / heat / hold, a noisy nonlinear rule), or any CSV via {@code --data}. Rows are
 *       split 80/20 into train and validation and standardised with the training statistics.
 *   <li><b>Model</b>: {@code features -> tanh hidden layer(s) -> softmax} ({@link Network}), trained
 *       on the mean cross-entropy (stable log-sum-exp, {@link Softmax}) with plain SGD, optionally
 *       heavy-ball momentum. Everything (data, split, initial weights, batch order) follows from
 *       {@code --seed}, so runs are reproducible bit for bit.
 *   <li><b>Output</b>: one JSON line per step, {@code {"step":1,"epoch":1,"loss":1.09,"lr":0.1}},
 *       and one per evaluation, {@code {"step":75,"epoch":1,"val_loss":0.71,"val_acc":0.69}};
 *       non-finite values are printed as the strings {@code "nan"}, {@code "inf"}, {@code "-inf"}
 *       and training goes on (the supervisor decides). Diagnostics go to stderr.
 *   <li><b>Control</b>: before each step the file named by {@code STEPWARDEN_CONTROL} is polled
 *       ({@link ControlFile}); a newer revision switches the rate for that very step, and the lines
 *       from then on carry {@code "applied_revision"}. A revision newer than the one a resumed
 *       checkpoint applied wins over {@code --lr}, as for any trainer that follows the protocol:
 *       the supervisor publishes the rate of every launch before it starts the trainer.
 *   <li><b>Checkpoints</b>: after each evaluation the full state goes to {@code DIR/last.ckpt}
 *       (temp file + rename) and {@code DIR/step-NNNNNN.ckpt} ({@link Checkpoint}). {@code
 *       --resume} continues the step axis from the checkpoint; {@code --skip-batches} advances the
 *       data cursor without counting steps, as one does to step over batches that caused a spike.
 * </ul>
 *
 * Exit codes: 0 when the epochs are done, 1 on an I/O failure (a one-line message, no stack
 * trace), 2 on a usage error.
 */
public final class DemoTrainer {
  /** The environment variable naming the control file (the supervisor's protocol). */
  public static final String CONTROL_ENV = "STEPWARDEN_CONTROL";

  static final double VALIDATION_FRACTION = 0.2;
  private static final String NAME = "demo trainer";

  private DemoTrainer() {}

  public static void main(String[] args) {
    PrintStream out =
        new PrintStream(
            new BufferedOutputStream(new FileOutputStream(FileDescriptor.out), 1 << 14),
            false,
            StandardCharsets.UTF_8);
    int code = run(args, System.getenv(), out, System.err);
    out.flush();
    System.exit(code);
  }

  /**
   * Runs the trainer in-process, as {@link #main} does, and returns the exit code instead of
   * exiting. {@code env} supplies {@value #CONTROL_ENV}; {@code out} gets the JSON lines, {@code
   * err} the diagnostics.
   */
  public static int run(String[] args, Map<String, String> env, PrintStream out, PrintStream err) {
    TrainerOptions options;
    try {
      options = TrainerOptions.parse(args);
    } catch (UsageException e) {
      err.println(NAME + ": " + e.getMessage());
      return 2;
    }
    if (options.help) {
      out.println(TrainerOptions.USAGE);
      out.flush();
      return 0;
    }
    try {
      return new Session(options, env, out, err).run();
    } catch (UsageException e) {
      err.println(NAME + ": " + e.getMessage());
      return 2;
    } catch (CsvData.FormatException e) {
      err.println(NAME + ": " + e.getMessage());
      return 2;
    } catch (Checkpoint.FormatException e) {
      err.println(NAME + ": cannot resume: " + e.getMessage());
      return 1;
    } catch (IOException e) {
      err.println(NAME + ": I/O failure: " + describe(e));
      return 1;
    } catch (UncheckedIOException e) {
      err.println(NAME + ": I/O failure: " + describe(e.getCause()));
      return 1;
    } catch (InterruptedException e) {
      Thread.currentThread().interrupt();
      err.println(NAME + ": interrupted; stopping");
      return 1;
    }
  }

  /** One line for an I/O failure: file system exceptions often carry only a path as message. */
  static String describe(IOException e) {
    if (e instanceof FileSystemException f) {
      return f.getFile() + (f.getOtherFile() == null ? "" : " -> " + f.getOtherFile()) + ": "
          + reason(e);
    }
    return reason(e);
  }

  /** The cause without the path. */
  static String reason(IOException e) {
    if (e instanceof FileSystemException f) {
      return f.getReason() != null ? f.getReason()
          : f instanceof NoSuchFileException ? "no such file or directory"
          : f instanceof AccessDeniedException ? "permission denied"
          : f instanceof FileAlreadyExistsException ? "exists and is not a directory"
          : f.getClass().getSimpleName();
    }
    return e.getMessage() == null ? e.getClass().getSimpleName() : e.getMessage();
  }

  /** One invocation: options reconciled with the checkpoint, data loaded, the loop. */
  private static final class Session {
    private final TrainerOptions o;
    private final Map<String, String> env;
    private final PrintStream out;
    private final PrintStream err;
    private Checkpoint resumed;

    Session(TrainerOptions o, Map<String, String> env, PrintStream out, PrintStream err) {
      this.o = o;
      this.env = env;
      this.out = out;
      this.err = err;
    }

    int run()
        throws IOException, UsageException, CsvData.FormatException, Checkpoint.FormatException,
            InterruptedException {
      if (o.resume != null && !o.sweep) {
        resumed = Checkpoint.read(Path.of(o.resume));
        adoptCheckpointSettings(resumed);
      } else if (o.resume != null) {
        throw new UsageException("--sweep always starts fresh; drop --resume");
      }
      Dataset all = loadData();
      Dataset.Split split = all.split(VALIDATION_FRACTION, o.seed);
      if (o.sweep) {
        Sweep.print(o, split, out);
        return out.checkError() ? stdoutClosed() : 0;
      }
      Network network = Network.of(all.features, o.hidden, o.layers, all.classes());
      Training t = resumed == null ? fresh(network, split) : restore(network, split, resumed);
      return train(t, split, all);
    }

    private Training fresh(Network network, Dataset.Split split) {
      Training t = Training.fresh(network, split, o.seed, o.batch, o.lr, o.momentum);
      t.cursor = o.skipBatches;
      return t;
    }

    private Training restore(Network network, Dataset.Split split, Checkpoint c)
        throws UsageException {
      if (!Arrays.equals(c.sizes(), network.sizes())) {
        throw new UsageException(
            "checkpoint " + o.resume + " holds a " + shape(c.sizes()) + " network, but the data"
                + " and options give " + shape(network.sizes()) + "; resume with matching --data,"
                + " --hidden and --layers");
      }
      Training t =
          new Training(network, split, c.seed(), c.batch(), c.params().clone(),
              c.velocity().clone(), o.given.contains("lr") ? o.lr : c.learningRate(),
              o.given.contains("momentum") ? o.momentum : c.momentum());
      t.step = c.step();
      t.cursor = c.cursor() + o.skipBatches;
      t.controlRevision = c.controlRevision();
      return t;
    }

    private void adoptCheckpointSettings(Checkpoint c) throws UsageException {
      o.seed = agree("seed", o.seed, c.seed());
      o.batch = (int) agree("batch", o.batch, c.batch());
      int ckptLayers = c.sizes().length - 2;
      o.layers = (int) agree("layers", o.layers, ckptLayers);
      if (ckptLayers > 0) {
        o.hidden = (int) agree("hidden", o.hidden, c.sizes()[1]);
      }
      String source = c.dataSource();
      if (source.startsWith("csv:")) {
        String file = source.substring(4);
        if (o.given.contains("data") && !dataSource().equals(source)) {
          throw new UsageException("--data " + o.data + " differs from the checkpoint's data "
              + file + "; drop --data or resume a matching checkpoint");
        }
        if (o.given.contains("samples")) {
          throw new UsageException("--samples applies to the built-in data, but checkpoint "
              + o.resume + " was trained on " + file);
        }
        o.data = file;
      } else if (source.startsWith("greenhouse:")) {
        if (o.given.contains("data")) {
          throw new UsageException("--data " + o.data + " given, but checkpoint " + o.resume
              + " was trained on the built-in data");
        }
        int samples = Integer.parseInt(source.substring("greenhouse:".length()));
        o.samples = (int) agree("samples", o.samples, samples);
      } else {
        throw new UsageException("checkpoint " + o.resume + " names unknown data '" + source + "'");
      }
    }

    private long agree(String option, long given, long fromCheckpoint) throws UsageException {
      if (o.given.contains(option) && given != fromCheckpoint) {
        throw new UsageException("--" + option + " " + given + " differs from the checkpoint's "
            + fromCheckpoint + " (" + o.resume + "); drop --" + option
            + " or resume a matching checkpoint");
      }
      return fromCheckpoint;
    }

    private Dataset loadData() throws IOException, CsvData.FormatException, UsageException {
      if (o.data == null) {
        return GreenhouseData.generate(o.samples, o.seed);
      }
      if (o.given.contains("samples") && resumed == null) {
        throw new UsageException("--samples applies to the built-in data only; drop it with --data");
      }
      return CsvData.read(Path.of(o.data));
    }

    private String dataSource() {
      return o.data == null
          ? "greenhouse:" + o.samples
          : "csv:" + Path.of(o.data).toAbsolutePath().normalize();
    }

    private int train(Training t, Dataset.Split split, Dataset all)
        throws IOException, InterruptedException {
      Path dir = Path.of(o.checkpointDir);
      try {
        Files.createDirectories(dir);
      } catch (IOException e) {
        throw new IOException("cannot create checkpoint directory " + dir + ": " + reason(e), e);
      }
      ControlFile control = controlFile();
      describeStart(t, split, all);
      String source = dataSource();
      long appliedHere = 0; // revision applied by this process, echoed on every line after
      double best = Double.POSITIVE_INFINITY;
      long bestStep = -1;
      long firstStep = t.step;
      long started = System.nanoTime();
      while (!t.finished(o.epochs)) {
        if (control != null) {
          ControlFile.Instruction in = control.poll(t.controlRevision);
          if (in != null) {
            t.learningRate = in.learningRate();
            t.controlRevision = in.revision();
            appliedHere = in.revision();
            err.println(NAME + ": control revision " + in.revision() + " applied before step "
                + (t.step + 1) + ": lr " + in.learningRate());
          }
        }
        long epoch = t.epochAt(t.cursor);
        double loss = t.step();
        JsonLine line = new JsonLine().put("step", t.step).put("epoch", epoch).put("loss", loss)
            .putExact("lr", t.learningRate);
        if (!emit(line, appliedHere)) {
          return stdoutClosed();
        }
        boolean due = o.evalEvery > 0 ? t.step % o.evalEvery == 0 : t.atEpochEnd();
        if (due || t.finished(o.epochs)) {
          double[] v = evaluateAndSave(t, epoch, dir, source, appliedHere);
          if (v == null) {
            return stdoutClosed();
          }
          if (v[0] < best) {
            best = v[0];
            bestStep = t.step;
          }
        }
        if (o.stepDelayMs > 0) {
          Thread.sleep(o.stepDelayMs);
        }
      }
      double seconds = (System.nanoTime() - started) / 1e9;
      long steps = t.step - firstStep;
      err.println(String.format(Locale.ROOT,
          "%s: done at step %d (epoch %d of %d): %d steps in %.2f s (%.0f steps/s)%s",
          NAME, t.step, Math.min(t.epochAt(t.cursor - 1), o.epochs), o.epochs, steps, seconds,
          seconds > 0 ? steps / seconds : 0.0,
          bestStep < 0 ? "" : String.format(Locale.ROOT, "; best val_loss %.6g at step %d",
              best, bestStep)));
      return 0;
    }

    /** Evaluates, prints the line, writes both checkpoints; null if stdout is gone. */
    private double[] evaluateAndSave(Training t, long epoch, Path dir, String source, long applied)
        throws IOException {
      double[] v = t.evaluate();
      JsonLine line = new JsonLine().put("step", t.step).put("epoch", epoch)
          .put("val_loss", v[0]).put("val_acc", v[1]);
      if (!emit(line, applied)) {
        return null;
      }
      byte[] bytes = Checkpoint.of(t, source).toBytes();
      Path last = dir.resolve("last.ckpt");
      Path numbered = dir.resolve(Checkpoint.stepFileName(t.step));
      try {
        Checkpoint.writeAtomically(numbered, bytes);
        Checkpoint.writeAtomically(last, bytes);
      } catch (IOException e) {
        throw new IOException("cannot write checkpoint into " + dir + ": " + describe(e), e);
      }
      return v;
    }

    private boolean emit(JsonLine line, long appliedRevision) {
      if (appliedRevision > 0) {
        line.put("applied_revision", appliedRevision);
      }
      out.println(line);
      out.flush();
      return !out.checkError();
    }

    private int stdoutClosed() {
      err.println(NAME + ": standard output is closed; stopping");
      return 1;
    }

    private ControlFile controlFile() {
      String path = env.get(CONTROL_ENV);
      return path == null || path.isBlank() ? null : new ControlFile(Path.of(path), err);
    }

    private void describeStart(Training t, Dataset.Split split, Dataset all) {
      StringBuilder classes = new StringBuilder();
      int[] counts = all.classCounts();
      for (int k = 0; k < counts.length; k++) {
        classes.append(k == 0 ? "" : ", ").append(all.classNames.get(k)).append(' ')
            .append(counts[k]);
      }
      err.println(String.format(Locale.ROOT,
          "%s: %s, %d train / %d validation rows, %d features, %d classes (%s); network %s"
              + " (%d parameters); %d steps per epoch; %s at step %d with lr %s",
          NAME, o.data == null ? "invented greenhouse data" : o.data, split.train().rows,
          split.validation().rows, all.features, all.classes(), classes,
          shape(t.network.sizes()), t.network.parameterCount(), t.stepsPerEpoch,
          resumed == null ? "starting" : "resuming from " + o.resume, t.step, t.learningRate));
      if (o.skipBatches > 0) {
        err.println(NAME + ": skipping " + o.skipBatches + " batches");
      }
    }
  }

  static String shape(int[] sizes) {
    StringBuilder sb = new StringBuilder();
    for (int s : sizes) {
      sb.append(sb.length() == 0 ? "" : "-").append(s);
    }
    return sb.toString();
  }
}
