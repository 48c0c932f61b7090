package dev.stepwarden.checkpoints;

import java.io.IOException;
import java.io.InputStream;
import java.nio.file.FileSystems;
import java.nio.file.FileVisitOption;
import java.nio.file.Files;
import java.nio.file.Path;
import java.nio.file.PathMatcher;
import java.nio.file.attribute.BasicFileAttributes;
import java.security.MessageDigest;
import java.security.NoSuchAlgorithmException;
import java.util.ArrayList;
import java.util.Comparator;
import java.util.HashMap;
import java.util.HexFormat;
import java.util.List;
import java.util.Map;
import java.util.Optional;
import java.util.stream.Stream;

/**
 * The checkpoint ledger: which of the trainer's checkpoint files exist, when they were written,
 * at which step, and how the run stood then.
 *
 * <p>Design: the supervisor calls {@link #scan} periodically. A file matching the glob counts
 * once its size and modification time are unchanged between two scans (a trainer still writing
 * it must not be taken as a rewind target). A rewrite of the same path (a trainer that
 * overwrites {@code last.pt}) is a new entry. The ledger only reads the user's files; it never
 * deletes or modifies them.
 */
public final class CheckpointLedger {
  /**
   * One settled checkpoint.
   *
   * @param healthy whether the run was healthy (finite training loss, no divergence) when written
   */
  public record Entry(Path path, long step, long wallMillis, long size, String sha256,
      double train, double validation, boolean healthy) {}

  private final Path root;
  private final PathMatcher matcher;
  private final String glob;
  private final Map<Path, long[]> pending = new HashMap<>();
  private final Map<Path, long[]> settled = new HashMap<>();
  private final List<Entry> entries = new ArrayList<>();

  public CheckpointLedger(Path workdir, String glob) {
    this.root = workdir.toAbsolutePath().normalize();
    this.glob = glob;
    this.matcher = FileSystems.getDefault().getPathMatcher("glob:" + glob);
  }

  public String glob() {
    return glob;
  }

  /**
   * Looks for new or rewritten checkpoint files; returns those that settled in this scan.
   *
   * @param step the step the trainer last reported
   * @param train the last training value (NaN if none)
   * @param validation the last validation value (NaN if none)
   * @param healthy whether the run is healthy now
   */
  public List<Entry> scan(long step, double train, double validation, boolean healthy,
      long wallMillis) throws IOException {
    List<Entry> fresh = new ArrayList<>();
    if (!Files.isDirectory(root)) {
      return fresh;
    }
    List<Path> found = new ArrayList<>();
    try (Stream<Path> s = Files.walk(root, 8, FileVisitOption.values())) {
      s.filter(p -> matcher.matches(root.relativize(p))).forEach(found::add);
    } catch (IOException | java.io.UncheckedIOException e) {
      return fresh; // a file vanished mid-walk: try again next scan
    }
    for (Path p : found) {
      BasicFileAttributes a;
      try {
        a = Files.readAttributes(p, BasicFileAttributes.class);
      } catch (IOException e) {
        continue;
      }
      if (!a.isRegularFile()) {
        continue;
      }
      long[] now = {a.size(), a.lastModifiedTime().toMillis()};
      long[] done = settled.get(p);
      if (done != null && done[0] == now[0] && done[1] == now[1]) {
        continue;
      }
      long[] before = pending.put(p, now);
      if (before != null && before[0] == now[0] && before[1] == now[1]) {
        pending.remove(p);
        settled.put(p, now);
        String hash;
        try {
          hash = sha256(p);
        } catch (IOException e) {
          continue;
        }
        Entry e = new Entry(p, step, wallMillis, now[0], hash, train, validation, healthy);
        entries.add(e);
        fresh.add(e);
      }
    }
    return fresh;
  }

  public List<Entry> entries() {
    return List.copyOf(entries);
  }

  /** The healthy entry with the lowest validation value (then the latest), if any. */
  public Optional<Entry> best() {
    return entries.stream().filter(Entry::healthy).filter(e -> Double.isFinite(e.validation()))
        .min(Comparator.comparingDouble(Entry::validation)
            .thenComparing(Comparator.comparingLong(Entry::step).reversed()));
  }

  /** The newest healthy entry written at or before {@code step}. */
  public Optional<Entry> latestHealthyAtOrBefore(long step) {
    return entries.stream().filter(Entry::healthy).filter(e -> e.step() <= step)
        .max(Comparator.comparingLong(Entry::step).thenComparingLong(Entry::wallMillis));
  }

  static String sha256(Path p) throws IOException {
    MessageDigest md;
    try {
      md = MessageDigest.getInstance("SHA-256");
    } catch (NoSuchAlgorithmException e) {
      throw new IllegalStateException("SHA-256 is required of every JVM", e);
    }
    byte[] buf = new byte[1 << 16];
    try (InputStream in = Files.newInputStream(p)) {
      int n;
      while ((n = in.read(buf)) > 0) {
        md.update(buf, 0, n);
      }
    }
    return HexFormat.of().formatHex(md.digest());
  }
}
