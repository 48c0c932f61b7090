import java.io.IOException;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.NoSuchFileException;
import java.nio.file.Path;
import java.nio.file.attribute.BasicFileAttributes;
import java.util.Objects;
import java.util.regex.Matcher;
import java.util.regex.Pattern;

/**
 * The trainer's side of the stepwarden control file, for JVM trainers: JDK only, one file; add
 * your own package line. Print it with {@code stepwarden helper java}.
 *
 * <pre>{@code
 * StepwardenControl control = StepwardenControl.fromEnvironment(0.1);
 * for (long step = 1; step <= steps; step++) {
 *   double lr = control.rate();              // one stat() per call; reads the file on change
 *   ... train one batch with lr ...
 *   System.out.println("{\"step\":" + step + ",\"loss\":" + loss + control.confirmationJson() + "}");
 * }
 * }</pre>
 *
 * <p>The supervisor replaces the file named by {@code STEPWARDEN_CONTROL} atomically with
 * {@code {"revision": 4, "protocol": 1, "learning_rate": 0.025, ...}}; reporting
 * {@code applied_revision} confirms the change. A missing or invalid file keeps the last good
 * rate. A file of a newer control protocol than {@link #PROTOCOL} gives one warning on stderr:
 * replace this copy with the output of {@code stepwarden helper java}. Not thread-safe.
 */
public final class StepwardenControl {
  /** The control-file protocol this copy follows; the supervisor writes it as "protocol". */
  public static final int PROTOCOL = 1;

  private static final Pattern REVISION = number("revision");
  private static final Pattern RATE = number("learning_rate");
  private static final Pattern CHECKPOINT = number("checkpoint_request");
  private static final Pattern PROTOCOL_KEY = number("protocol");

  private final Path path;
  private double rate;
  private long revision;
  private long applied;
  private long checkpointSeen;
  private boolean checkpointPending;
  private Object stamp;
  private boolean protocolWarned;

  /** @param path the control file, or null when unsupervised (the rate stays {@code defaultRate}) */
  public StepwardenControl(Path path, double defaultRate) {
    this.path = path;
    this.rate = defaultRate;
  }

  /** Uses the file named by {@code STEPWARDEN_CONTROL}, if set. */
  public static StepwardenControl fromEnvironment(double defaultRate) {
    String p = System.getenv("STEPWARDEN_CONTROL");
    return new StepwardenControl(p == null || p.isBlank() ? null : Path.of(p), defaultRate);
  }

  /** The learning rate in force now. */
  public double rate() {
    poll();
    applied = revision;
    return rate;
  }

  /** The revision whose rate {@link #rate()} handed out last (0: none yet). */
  public long appliedRevision() {
    return applied;
  }

  /** {@code ,"lr":R,"applied_revision":N} to append inside your JSON metric line. */
  public String confirmationJson() {
    return ",\"lr\":" + rate + (applied > 0 ? ",\"applied_revision\":" + applied : "");
  }

  /** True once for each checkpoint request (the supervisor is about to be pre-empted). */
  public boolean checkpointRequested() {
    poll();
    boolean r = checkpointPending;
    checkpointPending = false;
    return r;
  }

  private void poll() {
    if (path == null) {
      return;
    }
    BasicFileAttributes a;
    try {
      a = Files.readAttributes(path, BasicFileAttributes.class);
    } catch (IOException e) {
      return; // no file yet: no intervention so far
    }
    // The file key (inode) changes on every rename, even within one clock tick.
    Object now = Objects.hash(a.fileKey(), a.lastModifiedTime(), a.size());
    if (now.equals(stamp)) {
      return;
    }
    String text;
    try {
      text = Files.readString(path, StandardCharsets.UTF_8);
    } catch (NoSuchFileException e) {
      return;
    } catch (IOException e) {
      System.err.println("StepwardenControl: cannot read " + path + ": " + e.getMessage());
      return;
    }
    Matcher r = REVISION.matcher(text);
    Matcher lr = RATE.matcher(text);
    if (!r.find() || !lr.find()) {
      return; // not a complete control file; the next change is looked at again
    }
    stamp = now;
    Matcher p = PROTOCOL_KEY.matcher(text);
    if (p.find() && Double.parseDouble(p.group(1)) > PROTOCOL && !protocolWarned) {
      protocolWarned = true;
      System.err.println("StepwardenControl: " + path + " is written in control protocol "
          + p.group(1) + " but this copy of StepwardenControl.java follows protocol " + PROTOCOL
          + ": replace it with the output of `stepwarden helper java`");
    }
    long rev = (long) Double.parseDouble(r.group(1));
    double value = Double.parseDouble(lr.group(1));
    if (rev > revision && value > 0 && Double.isFinite(value)) {
      revision = rev;
      rate = value;
      Matcher c = CHECKPOINT.matcher(text);
      if (c.find() && (long) Double.parseDouble(c.group(1)) > checkpointSeen) {
        checkpointSeen = (long) Double.parseDouble(c.group(1));
        checkpointPending = true;
      }
    }
  }

  private static Pattern number(String key) {
    return Pattern.compile("\"" + key + "\"\\s*:\\s*(-?[0-9][0-9.eE+-]*)");
  }
}
