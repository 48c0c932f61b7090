package dev.stepwarden.checkpoints;

import java.io.IOException;
import java.io.InputStream;
import java.io.UncheckedIOException;
import java.nio.file.FileSystems;
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
import java.util.LinkedHashMap;
import java.util.List;
import java.util.Map;
import java.util.Objects;
import java.util.Optional;
import java.util.regex.Matcher;
import java.util.regex.Pattern;
import java.util.stream.Stream;

/**
 * The checkpoint ledger: which of the trainer's checkpoint files exist, when they were written,
 * at which step, how the run stood then, and where our vault copy is.
 *
 * <p>Design:
 * <ul>
 *   <li><b>Where to look.</b> Only below the glob's fixed leading folders ({@code ckpt/} for
 *       {@code ckpt/*.pt}), never the whole working directory, which may hold a data set of
 *       millions of files; and only as deep as the glob reaches ({@code **} goes up to 16
 *       levels). Symbolic links to folders are not followed.
 *   <li><b>When a file counts.</b> Never while a process of the trainer's tree holds it open
 *       for writing ({@link WriterProbe}); then once its size and modification time have stayed
 *       the same for a window that grows with the time it kept changing and with its size
 *       ({@link #window}), measured between scans: a trainer still writing, or stalled between
 *       chunks, must not give us a rewind target. A rewrite of the same path (a trainer
 *       overwriting {@code last.pt}) is a new entry. A file another live run's glob also
 *       matches ({@link WatchClaims}) is taken only when this run's trainer was seen writing it.
 *   <li><b>Its step.</b> The step the trainer had reported when the file <em>first appeared</em>,
 *       not when it settled, so "written before the onset" stays true for a large file that took a
 *       while. A number the file name labels as a step ({@code step-120}) that lies between the
 *       previous scan's step and one scan interval past the current one is taken instead; an
 *       epoch or a bare number never is. {@link Entry#stepFrom()} says which.
 *   <li><b>Baseline.</b> Files present before the trainer starts (an earlier run's leftovers) are
 *       ignored until they change: their step is unknown. So is a file whose time is older than
 *       the run's first launch ({@link #notBefore}), wherever it came from.
 *   <li><b>Vault.</b> Each healthy entry is kept in the {@link CheckpointVault} the moment it
 *       settles; its hash is taken of the vault copy, the bytes a rewind will use. A file the
 *       trainer replaced between the settle check and the link (or copy) is not kept under the
 *       old step: the copy is dropped and the new file becomes a sighting of its own. {@link #prune}
 *       keeps the best and the latest K healthy copies. An in-place overwrite of a linked file is
 *       recognised by its unchanged file identity: that entry is marked damaged and the vault
 *       switches to copies.
 * </ul>
 * The ledger reads the user's files but never deletes or modifies them. Its methods are
 * synchronized: the supervising thread scans (and hashes, which takes seconds for a large file)
 * without holding the supervisor's lock, so the pumps keep draining the trainer's pipes, while a
 * pump thread may read the entries for the state file.
 */
public final class CheckpointLedger {
  /**
   * A number the file name labels as a step ({@code step-120}, {@code iter_3000},
   * {@code global_step=40}); an epoch, a counter or a version is never taken as a step.
   */
  private static final Pattern STEP_IN_NAME = Pattern.compile(
      "(?i)(?<![a-z])(?:global_?)?(?:steps?|iter|iteration|it)[-_=]?(\\d{1,18})(?!\\d)");
  /** The settle window's cap: however large the file, an hour's stall never passes silently. */
  static final long MAX_WINDOW_MILLIS = 120_000;
  /** The window grows by a millisecond per MiB (about 1 s per GiB): common practice, no source. */
  static final long BYTES_PER_WINDOW_MILLI = 1 << 20;
  /** Where an entry's step came from, for the audit. */
  public static final String STEP_FROM_NAME = "file name";
  public static final String STEP_FROM_TRAINER = "trainer's step when the file appeared";
  public static final String STEP_FROM_NONE = "no step reported yet";

  /**
   * One settled checkpoint.
   *
   * @param path the trainer's file
   * @param step the step when it first appeared (or the exact step from its name)
   * @param wallMillis when it first appeared
   * @param size its size when it settled
   * @param sha256 hash of the vault copy (of the original when there is no vault)
   * @param healthy whether the run was healthy (finite values) when it appeared
   * @param vault our copy, or null (no vault, not healthy, or pruned)
   * @param state {@code ok}, {@code pruned} (vault copy removed), {@code abandoned} (written on a
   *     branch of the run that a rewind left behind) or {@code damaged} (its bytes changed)
   */
  public record Entry(Path path, long step, long wallMillis, long size, String sha256,
      double train, double validation, boolean healthy, Path vault, String state,
      String stepFrom) {
    public Entry {
      Objects.requireNonNull(path, "path");
      state = state == null ? OK : state;
      stepFrom = stepFrom == null ? STEP_FROM_TRAINER : stepFrom;
    }

    /** An entry whose step is the trainer's step when the file appeared. */
    public Entry(Path path, long step, long wallMillis, long size, String sha256,
        double train, double validation, boolean healthy, Path vault, String state) {
      this(path, step, wallMillis, size, sha256, train, validation, healthy, vault, state,
          STEP_FROM_TRAINER);
    }

    /** The file a rewind would resume from: the vault copy when there is one. */
    public Path usable() {
      return vault != null ? vault : path;
    }

    Entry with(Path newVault, String newState) {
      return new Entry(path, step, wallMillis, size, sha256, train, validation, healthy,
          newVault, newState, stepFrom);
    }
  }

  public static final String OK = "ok";
  public static final String PRUNED = "pruned";
  public static final String ABANDONED = "abandoned";
  public static final String DAMAGED = "damaged";

  /** Something the supervisor should write to the audit log. */
  public record Notice(String type, Map<String, Object> fields) {}

  /** A path's last settled stamp, for resume: an unchanged file is not taken in twice. */
  public record Seen(Path path, long size, long modifiedMillis) {}

  private final Path root;
  private final Path base;
  private final int depth;
  private final PathMatcher matcher;
  private final String glob;
  private final CheckpointVault vault;
  private final long settleMillis;
  private final Map<Path, Sighting> pending = new HashMap<>();
  private final Map<Path, long[]> settled = new HashMap<>();
  private final Map<Object, Integer> linkedKeys = new HashMap<>();
  private final List<Entry> entries = new ArrayList<>();
  private final List<Notice> notices = new ArrayList<>();
  private long previousScanStep = -1;
  private Path inUse;
  private WriterProbe writers = WriterProbe.NONE;
  private WatchClaims claims;
  private long notBeforeMillis = Long.MIN_VALUE;
  /**
   * Test seam: runs between the settle check and the vault's link or copy, the window in which a
   * trainer can rename a newer file onto the path. Tests in this package set it; nothing else does.
   */
  Runnable beforeKeep = () -> {};

  private static final class Sighting {
    long size;
    long mtime;
    long unchangedSince;
    final long step;
    final String stepFrom;
    final long firstMillis;
    boolean sawOurWriter;
    /** Another live run whose glob matched the file while it was pending, if any. */
    WatchClaims.Other sharedWith;
    final double train;
    final double validation;
    final boolean healthy;

    Sighting(long size, long mtime, long now, Step step, double train, double validation,
        boolean healthy) {
      this.size = size;
      this.mtime = mtime;
      this.unchangedSince = now;
      this.step = step.step();
      this.stepFrom = step.from();
      this.firstMillis = now;
      this.train = train;
      this.validation = validation;
      this.healthy = healthy;
    }
  }

  /** A ledger without a vault that settles after two scans with an unchanged file. */
  public CheckpointLedger(Path workdir, String glob) {
    this(workdir, glob, null, 0);
  }

  /**
   * @param workdir the trainer's working directory; the glob is relative to it
   * @param glob e.g. {@code ckpt/*.pt}
   * @param vault where healthy checkpoints are kept, or null for none
   * @param settleMillis how long a file must stay unchanged before it counts
   */
  public CheckpointLedger(Path workdir, String glob, CheckpointVault vault, long settleMillis) {
    this.glob = glob.replace('\\', '/');
    // An absolute glob ({run_dir}/ckpt/*.pt once filled) is matched below the file system root.
    String relative = this.glob.replaceFirst("^/+", "");
    this.root = relative.length() < this.glob.length() ? Path.of("/")
        : workdir.toAbsolutePath().normalize();
    this.matcher = FileSystems.getDefault().getPathMatcher("glob:" + relative);
    String[] parts = relative.split("/");
    int fixed = 0;
    while (fixed < parts.length - 1 && !hasGlobMeta(parts[fixed])) {
      fixed++;
    }
    Path b = root;
    for (int i = 0; i < fixed; i++) {
      b = b.resolve(parts[i]);
    }
    this.base = b.normalize();
    boolean deep = false;
    for (int i = fixed; i < parts.length; i++) {
      deep |= parts[i].contains("**");
    }
    this.depth = deep ? 16 : parts.length - fixed;
    this.vault = vault;
    this.settleMillis = settleMillis;
  }

  /**
   * Fills {@code {run_dir}} in a {@code checkpoints.watch} glob with the run directory, so runs of
   * one sweep can each watch a folder of their own. The path is put in as it is: a run directory
   * whose name holds glob characters ({@code * ? [ ] { }}) is matched as a pattern.
   */
  public static String fillRunDir(String watch, Path runDir) {
    return watch.replace("{run_dir}", runDir.toAbsolutePath().normalize().toString()
        .replace('\\', '/'));
  }

  public synchronized String glob() {
    return glob;
  }

  /** The folder the scan starts in (the glob's fixed leading folders). */
  public synchronized Path scanRoot() {
    return base;
  }

  public synchronized Optional<CheckpointVault> vault() {
    return Optional.ofNullable(vault);
  }

  /**
   * Who may still be writing: a file the probe reports open for writing is never taken, however
   * long it stays unchanged (a trainer stalled between two chunks of a large checkpoint).
   */
  public synchronized void watchWriters(WriterProbe probe) {
    writers = Objects.requireNonNull(probe, "probe");
  }

  /**
   * The live runs' claims: a file another live run's glob also matches is taken only when a
   * process of this run's trainer was seen writing it (else its owner is unknown: never ours).
   */
  public synchronized void claims(WatchClaims c) {
    claims = c;
  }

  /** The glob as an absolute pattern (for the claims of other runs). */
  public synchronized String absoluteGlob() {
    return glob.startsWith("/") ? glob : root.toString().replace('\\', '/') + "/" + glob;
  }

  /**
   * Files last modified before {@code wallMillis} (the run's first launch) are never taken: they
   * were not written by this run (a file moved or copied in keeps its old time).
   */
  public synchronized void notBefore(long wallMillis) {
    notBeforeMillis = wallMillis;
  }

  /**
   * How long a file must stay unchanged before it counts: the configured settle time, or longer
   * for a file that took a while to appear (twice the time it kept changing while watched) and
   * for a large one (about 1 s per GiB): slow storage stalls longer between chunks. Capped at
   * {@link #MAX_WINDOW_MILLIS}.
   */
  static long window(long settleMillis, long size, long growingMillis) {
    long grown = 2 * Math.max(0, growingMillis) + Math.max(0, size) / BYTES_PER_WINDOW_MILLI;
    return Math.max(settleMillis, Math.min(MAX_WINDOW_MILLIS, grown));
  }

  /** Ignores every matching file present now until it changes (an earlier run's leftovers). */
  public synchronized void baseline() throws IOException {
    for (Path p : find()) {
      long[] stamp = stamp(p);
      if (stamp != null) {
        settled.put(p, stamp);
      }
    }
  }

  /**
   * Looks for new or rewritten checkpoint files; returns those that settled in this scan.
   *
   * @param step the step the trainer last reported
   * @param train the last training value (NaN if none)
   * @param validation the last validation value (NaN if none)
   * @param healthy whether the run is healthy now
   * @param forceSettle take files that appeared but have not settled yet: only when the trainer
   *     has exited on its own, so nothing can still be writing
   */
  public synchronized List<Entry> scan(long step, double train, double validation,
      boolean healthy, long wallMillis, boolean forceSettle) throws IOException {
    List<Entry> fresh = new ArrayList<>();
    Map<Object, Boolean> writing = null;
    for (Path p : find()) {
      long[] now = stamp(p);
      if (now == null) {
        continue;
      }
      long[] done = settled.get(p);
      if (done != null && done[0] == now[0] && done[1] == now[1]) {
        continue;
      }
      Sighting s = pending.get(p);
      if (s == null && now[1] < notBeforeMillis) {
        settled.put(p, now); // older than this run: not ours, its step unknown
        continue;
      }
      if (s == null) {
        if (done != null) {
          noticeInPlaceRewrite(p, now);
        }
        s = new Sighting(now[0], now[1], wallMillis, stepFor(p, step), train, validation,
            healthy);
        if (claims != null) { // whose could it be, while the other runs are still alive
          s.sharedWith = claims.sharedWith(p, wallMillis).orElse(null);
        }
        pending.put(p, s);
        if (!forceSettle) {
          continue;
        }
      } else if (s.size != now[0] || s.mtime != now[1]) {
        s.size = now[0];
        s.mtime = now[1];
        s.unchangedSince = wallMillis;
        if (!forceSettle) {
          continue;
        }
      }
      if (writing == null) {
        writing = writers.openForWriting();
      }
      Object key = fileKey(p);
      Boolean writer = key == null ? null : writing.get(key);
      s.sawOurWriter |= Boolean.TRUE.equals(writer);
      if (!forceSettle && writer != null) { // anyone writing it, ours or not
        s.unchangedSince = wallMillis; // still open for writing: a stall, not the end
        continue;
      }
      if (!forceSettle && wallMillis - s.unchangedSince
          < window(settleMillis, s.size, s.unchangedSince - s.firstMillis)) {
        continue;
      }
      if (claims != null && s.sharedWith == null) {
        // Looked at while pending, so a run that ends before this file settles still counts.
        s.sharedWith = claims.sharedWith(p, wallMillis).orElse(null);
      }
      Optional<WatchClaims.Other> other = s.sawOurWriter ? Optional.empty()
          : Optional.ofNullable(s.sharedWith);
      if (other.isPresent()) {
        pending.remove(p);
        settled.put(p, now);
        Map<String, Object> f = new LinkedHashMap<>();
        f.put("path", p.toString());
        f.put("other_run", other.get().runDir());
        f.put("message", "not taking " + p + ": the live run in " + other.get().runDir()
            + " watches the same files and no process of this run was seen writing it; give"
            + " each run a folder of its own (checkpoints.watch: \"{run_dir}/ckpt/*.pt\" and"
            + " the same path in the command)");
        notices.add(new Notice("checkpoint-skipped", f));
        continue;
      }
      pending.remove(p);
      settled.put(p, now);
      Entry e = settle(p, s, now);
      if (e == REPLACED) {
        // The trainer put a newer file at this path between our look and the vault's link or
        // copy: what we kept is not what settled. Start over with it as a new sighting, at the
        // step of now, so its step is never an earlier one than the bytes it holds.
        if (done == null) {
          settled.remove(p);
        } else {
          settled.put(p, done);
        }
        long[] later = stamp(p);
        if (later != null) {
          pending.put(p, new Sighting(later[0], later[1], wallMillis, stepFor(p, step), train,
              validation, healthy));
        }
        continue;
      }
      if (e != null) {
        entries.add(e);
        fresh.add(e);
      }
    }
    previousScanStep = step;
    return fresh;
  }

  /** {@link #scan(long, double, double, boolean, long, boolean)} without forcing. */
  public synchronized List<Entry> scan(long step, double train, double validation,
      boolean healthy,
      long wallMillis) throws IOException {
    return scan(step, train, validation, healthy, wallMillis, false);
  }

  /** Marks a file replaced while it was being kept (see {@link #scan}). */
  private static final Entry REPLACED = new Entry(Path.of(""), -1, 0, 0, "", Double.NaN,
      Double.NaN, false, null, OK);

  private Entry settle(Path p, Sighting s, long[] settledStamp) {
    Path kept = null;
    String hash;
    try {
      if (vault != null && s.healthy) {
        beforeKeep.run();
        CheckpointVault.Kept k = vault.keep(p, s.step);
        // A link shares the inode it got: its stamp must be the settled one. A copy read the
        // path: the path must still carry the settled stamp after the copy.
        long[] got = stamp(k.linked() ? k.path() : p);
        if (got == null || got[0] != settledStamp[0] || got[1] != settledStamp[1]) {
          vault.remove(k.path());
          return REPLACED;
        }
        kept = k.path();
        if (k.linked() && k.fileKey() != null) {
          linkedKeys.put(k.fileKey(), entries.size());
        }
      }
      hash = sha256(kept != null ? kept : p);
    } catch (IOException e) {
      Map<String, Object> f = new LinkedHashMap<>();
      f.put("path", p.toString());
      f.put("message", "could not keep or hash the checkpoint: " + e.getMessage());
      notices.add(new Notice("vault-warning", f));
      return null;
    }
    long size;
    try {
      size = Files.size(kept != null ? kept : p);
    } catch (IOException e) {
      size = s.size;
    }
    return new Entry(p, s.step, s.firstMillis, size, hash, s.train, s.validation, s.healthy,
        kept, OK, s.stepFrom);
  }

  /** A settled file changed again: if its identity is one of our links, the link changed too. */
  private void noticeInPlaceRewrite(Path p, long[] now) {
    Object key;
    try {
      key = Files.readAttributes(p, BasicFileAttributes.class).fileKey();
    } catch (IOException e) {
      return;
    }
    Integer index = key == null ? null : linkedKeys.remove(key);
    if (index == null) {
      return; // rewritten as a new file (write, then rename): our link still holds the old bytes
    }
    Entry old = entries.get(index);
    entries.set(index, old.with(null, DAMAGED));
    try {
      if (old.vault() != null) {
        vault.remove(old.vault());
      }
    } catch (IOException e) {
      // the damaged copy stays; it is marked damaged and never used
    }
    vault.copyFromNowOn();
    Map<String, Object> f = new LinkedHashMap<>();
    f.put("path", p.toString());
    f.put("step", old.step());
    f.put("lost_vault_copy", old.vault() == null ? null : old.vault().toString());
    f.put("message", "the trainer overwrote " + p + " in place, which also changed our hard-linked"
        + " vault copy of step " + old.step() + "; the vault copies files from now on");
    notices.add(new Notice("vault-warning", f));
  }

  /** A checkpoint's step and where it came from. */
  record Step(long step, String from) {}

  /**
   * The step of a file first seen now: the trainer's last reported step, or the step its name
   * labels ({@code step-120}) when that lies between the previous scan's step and one scan
   * interval past the current one (the trainer may have saved before we read its line). An
   * unlabelled number ({@code epoch-001}, {@code ckpt-3}) is never taken.
   */
  private Step stepFor(Path p, long step) {
    Matcher m = STEP_IN_NAME.matcher(p.getFileName().toString());
    long named = -1;
    while (m.find()) {
      named = Long.parseLong(m.group(1));
    }
    long ahead = step + Math.max(1, step - Math.max(previousScanStep, 0));
    if (named >= 0 && named >= previousScanStep && named <= ahead) {
      return new Step(named, STEP_FROM_NAME);
    }
    return new Step(step, step < 0 ? STEP_FROM_NONE : STEP_FROM_TRAINER);
  }

  private List<Path> find() throws IOException {
    List<Path> found = new ArrayList<>();
    if (!Files.isDirectory(base)) {
      return found;
    }
    try (Stream<Path> s = Files.walk(base, depth)) {
      s.filter(p -> matcher.matches(root.relativize(p))).forEach(found::add);
    } catch (IOException | UncheckedIOException e) {
      return found; // a file or folder vanished mid-walk: try again next scan
    }
    return found;
  }

  private static long[] stamp(Path p) {
    try {
      BasicFileAttributes a = Files.readAttributes(p, BasicFileAttributes.class);
      return a.isRegularFile() ? new long[] {a.size(), a.lastModifiedTime().toMillis()} : null;
    } catch (IOException e) {
      return null;
    }
  }

  private static Object fileKey(Path p) {
    try {
      return Files.readAttributes(p, BasicFileAttributes.class).fileKey();
    } catch (IOException e) {
      return null;
    }
  }

  private static boolean hasGlobMeta(String part) {
    return part.chars().anyMatch(c -> c == '*' || c == '?' || c == '[' || c == '{' || c == '\\');
  }

  /** Notices gathered since the last call (vault warnings), for the audit log. */
  public synchronized List<Notice> drainNotices() {
    List<Notice> out = List.copyOf(notices);
    notices.clear();
    return out;
  }

  public synchronized List<Entry> entries() {
    return List.copyOf(entries);
  }

  /** The healthy usable entry with the lowest validation value (then the latest), if any. */
  public synchronized Optional<Entry> best() {
    return entries.stream().filter(this::usable).filter(e -> Double.isFinite(e.validation()))
        .min(Comparator.comparingDouble(Entry::validation)
            .thenComparing(Comparator.comparingLong(Entry::step).reversed()));
  }

  /** The newest healthy usable entry written at or before {@code step}. */
  public synchronized Optional<Entry> latestHealthyAtOrBefore(long step) {
    return entries.stream().filter(this::usable).filter(e -> e.step() <= step)
        .max(Comparator.comparingLong(Entry::step).thenComparingLong(Entry::wallMillis));
  }

  /** Healthy, on the current branch, undamaged, and (with a vault) still in the vault. */
  private boolean usable(Entry e) {
    return e.healthy() && OK.equals(e.state()) && (vault == null || e.vault() != null);
  }

  /**
   * Checks that a rewind target still holds the bytes we hashed; marks it damaged when not.
   *
   * @return true when the file is intact
   */
  public synchronized boolean verify(Entry e) {
    boolean intact;
    try {
      intact = Files.isRegularFile(e.usable()) && sha256(e.usable()).equals(e.sha256());
    } catch (IOException ex) {
      intact = false;
    }
    if (!intact) {
      int i = entries.indexOf(e);
      if (i >= 0) {
        entries.set(i, e.with(e.vault(), DAMAGED));
      }
    }
    return intact;
  }

  /**
   * Marks entries written after {@code step} as abandoned: a rewind to {@code step} left that
   * branch of the run behind, so they are no rewind targets any more. Returns how many.
   */
  public synchronized int abandonAfter(long step) {
    int n = 0;
    for (int i = 0; i < entries.size(); i++) {
      Entry e = entries.get(i);
      if (e.step() > step && OK.equals(e.state())) {
        entries.set(i, e.with(e.vault(), ABANDONED));
        n++;
      }
    }
    previousScanStep = Math.min(previousScanStep, step); // the step axis goes back with the rewind
    // Files the stopped trainer was still writing past the target belong to that branch too.
    pending.entrySet().removeIf(p -> {
      if (p.getValue().step > step) {
        settled.put(p.getKey(), new long[] {p.getValue().size, p.getValue().mtime});
        return true;
      }
      return false;
    });
    return n;
  }

  /** The vault copy a running trainer was started from: never pruned while it is in use. */
  public synchronized void inUse(Path vaultCopy) {
    inUse = vaultCopy;
  }

  /**
   * Removes vault copies beyond the best and the latest {@code keep} healthy entries (and those
   * of abandoned or damaged entries). Only our own vault files are deleted.
   *
   * @return the vault files removed
   */
  public synchronized List<Path> prune() throws IOException {
    List<Path> removed = new ArrayList<>();
    if (vault == null) {
      return removed;
    }
    Optional<Entry> best = best();
    List<Entry> latest = entries.stream().filter(this::usable)
        .sorted(Comparator.comparingLong(Entry::step).thenComparingLong(Entry::wallMillis)
            .reversed())
        .limit(vault.keep()).toList();
    for (int i = 0; i < entries.size(); i++) {
      Entry e = entries.get(i);
      if (e.vault() == null || latest.contains(e) || best.filter(e::equals).isPresent()
          || e.vault().equals(inUse)) {
        continue;
      }
      if (vault.owns(e.vault())) {
        vault.remove(e.vault());
        removed.add(e.vault());
      }
      entries.set(i, e.with(null, OK.equals(e.state()) ? PRUNED : e.state()));
    }
    return removed;
  }

  /** What a resumed run needs: the settled stamps of watched files. */
  public synchronized List<Seen> seen() {
    List<Seen> out = new ArrayList<>();
    settled.forEach((p, s) -> out.add(new Seen(p, s[0], s[1])));
    out.sort(Comparator.comparing(s -> s.path().toString()));
    return out;
  }

  /**
   * Restores entries and stamps saved by an earlier supervisor of this run, then baselines
   * whatever changed while no supervisor watched (its step is unknown).
   */
  public synchronized void restore(List<Entry> saved, List<Seen> stamps) throws IOException {
    entries.clear();
    entries.addAll(saved);
    settled.clear();
    for (Seen s : stamps) {
      settled.put(s.path(), new long[] {s.size(), s.modifiedMillis()});
    }
    for (int i = 0; i < entries.size(); i++) {
      Entry e = entries.get(i);
      if (e.vault() != null && !Files.isRegularFile(e.vault())) {
        entries.set(i, e.with(null, DAMAGED));
      } else if (e.vault() != null) {
        Object key = fileKey(e.vault());
        if (key != null && key.equals(fileKey(e.path()))) {
          linkedKeys.put(key, i); // still a hard link of the trainer's file
        }
      }
    }
    baseline();
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
