package dev.stepwarden.supervise;

import dev.stepwarden.audit.AuditLog;
import dev.stepwarden.audit.AuditRecord;
import dev.stepwarden.checkpoints.CheckpointLedger;
import dev.stepwarden.checkpoints.CheckpointVault;
import dev.stepwarden.checkpoints.WatchClaims;
import dev.stepwarden.checkpoints.WriterProbe;
import dev.stepwarden.rules.GuardFile;
import java.io.IOException;
import java.nio.file.DirectoryStream;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.HashSet;
import java.util.List;
import java.util.Optional;
import java.util.Set;
import java.util.function.Consumer;
import java.util.function.LongSupplier;

/**
 * The run's checkpoints: ledger scans (audited as they settle), the vault kept trim, and the
 * choice of where a relaunch resumes (the newest healthy vault copy at or before a step whose
 * bytes still match their hash). Without {@code checkpoints} in the guard file every question
 * has the answer "none". Not thread-safe: {@link #scan} runs without the run's lock (hashing a
 * big file takes seconds); everything else under it.
 */
final class CheckpointKeeper {
  /** Where a relaunch resumes, and how many later checkpoints the rewind left behind. */
  record Target(Optional<CheckpointLedger.Entry> entry, int abandoned) {
    String resumeFrom() {
      return entry.map(e -> e.usable().toString()).orElse("");
    }
  }

  private final CheckpointLedger ledger;
  private final WatchClaims claims;
  private final AuditLog audit;
  private final Consumer<String> say;

  /**
   * @param ledger the run's ledger, or null without checkpoints
   * @param claims this run's claim on its glob among the live runs, or null (released by
   *     {@link #close})
   */
  CheckpointKeeper(CheckpointLedger ledger, WatchClaims claims, AuditLog audit,
      Consumer<String> say) {
    this.ledger = ledger;
    this.claims = claims;
    this.audit = audit;
    this.say = say;
  }

  /**
   * Opens the keeper of a run's {@code checkpoints} (none without them): {@code {run_dir}}
   * filled in the glob, the glob claimed among the live runs (so two runs in one folder do not
   * take each other's files), and a file the trainer's tree ({@code trainerPid}, -1 between
   * launches) still holds open for writing never taken.
   */
  static CheckpointKeeper open(Optional<GuardFile.Checkpoints> spec, RunDirectory dir,
      Path workdir, boolean copyVault, long settleMillis, LongSupplier trainerPid,
      AuditLog audit, Consumer<String> say) {
    if (spec.isEmpty()) {
      return new CheckpointKeeper(null, null, audit, say);
    }
    GuardFile.Checkpoints c = spec.get();
    CheckpointLedger l = new CheckpointLedger(workdir,
        CheckpointLedger.fillRunDir(c.watch(), dir.root()),
        new CheckpointVault(dir.file(RunDirectory.VAULT), c.keep(), copyVault), settleMillis);
    WatchClaims claims = null;
    try {
      claims = WatchClaims.claim(l.absoluteGlob(), dir.root());
    } catch (IOException e) {
      say.accept("cannot register this run's checkpoint glob among the live runs ("
          + e.getMessage() + "); another run watching the same files could not be told apart");
    }
    l.claims(claims);
    l.watchWriters(WriterProbe.ofTree(trainerPid));
    return new CheckpointKeeper(l, claims, audit, say);
  }

  /** Files present before the run (or the probe's): their step is unknown, never a target. */
  void baseline() throws IOException {
    if (ledger != null) {
      ledger.baseline();
    }
  }

  /**
   * Ignores files older than now, the run's first launch: a checkpoint moved in from elsewhere is
   * not this run's. File times are the file system's wall clock, not the run's (test) clock;
   * 2 s of slack for coarse time stamps.
   */
  void notBeforeNow() {
    if (ledger != null) {
      ledger.notBefore(System.currentTimeMillis() - 2_000);
    }
  }

  /** Looks at the glob; the caller records the result with {@link #record}. */
  List<CheckpointLedger.Entry> scan(long step, double train, double validation, boolean healthy,
      long now, boolean forceSettle) throws IOException {
    return ledger == null ? List.of()
        : ledger.scan(step, train, validation, healthy, now, forceSettle);
  }

  /** Audits what a scan found and keeps the vault trim; true when anything new settled. */
  boolean record(List<CheckpointLedger.Entry> fresh) throws IOException {
    if (ledger == null) {
      return false;
    }
    for (CheckpointLedger.Notice n : ledger.drainNotices()) {
      audit.append(new AuditRecord.LedgerNotice(n.type(), n.fields()));
      say.accept(String.valueOf(n.fields().get("message")));
    }
    for (CheckpointLedger.Entry e : fresh) {
      audit.append(new AuditRecord.Checkpoint(e.path().toString(), e.step(), e.stepFrom(),
          e.size(), e.sha256(), StateFile.num(e.train()), StateFile.num(e.validation()), e.healthy(),
          e.vault() == null ? null : e.vault().toString(), e.vault() == null ? null
              : ledger.vault().map(CheckpointVault::copying).orElse(false) ? "copy"
              : "hard link"));
    }
    if (fresh.isEmpty()) {
      return false;
    }
    List<Path> removed = ledger.prune();
    if (!removed.isEmpty()) {
      audit.append(new AuditRecord.VaultPruned(removed.stream().map(Path::toString).toList(),
          ledger.entries().stream().filter(e -> e.vault() != null)
              .map(e -> e.vault().toString()).toList()));
    }
    return true;
  }

  /** The newest healthy vault checkpoint at or before {@code step} whose bytes are intact. */
  Optional<CheckpointLedger.Entry> choose(long step) throws IOException {
    if (ledger == null) {
      return Optional.empty();
    }
    while (true) {
      Optional<CheckpointLedger.Entry> t = ledger.latestHealthyAtOrBefore(step);
      if (t.isEmpty() || ledger.verify(t.get())) {
        return t;
      }
      audit.append(new AuditRecord.VaultWarning(t.get().usable().toString(), t.get().step(),
          "the vault copy no longer matches its hash; not using it"));
    }
  }

  /**
   * Chooses where a relaunch resumes (at or before {@code targetStep}), keeps that copy from
   * pruning and marks the checkpoints after it as abandoned (a branch left behind).
   */
  Target resumeAt(long targetStep) throws IOException {
    Optional<CheckpointLedger.Entry> t = choose(targetStep);
    if (ledger == null) {
      return new Target(t, 0);
    }
    ledger.inUse(t.map(CheckpointLedger.Entry::vault).orElse(null));
    int abandoned = ledger.abandonAfter(t.map(CheckpointLedger.Entry::step).orElse(-1L));
    return new Target(t, abandoned);
  }

  /**
   * Removes vault files that no ledger entry references (a supervisor killed between keeping a
   * copy and saving the state leaves one). Only files inside our own vault folder are touched.
   *
   * @return how many were removed
   */
  int removeOrphans() throws IOException {
    Optional<CheckpointVault> v = ledger == null ? Optional.empty() : ledger.vault();
    if (v.isEmpty() || !Files.isDirectory(v.get().dir())) {
      return 0;
    }
    Set<Path> referenced = new HashSet<>();
    for (CheckpointLedger.Entry e : ledger.entries()) {
      if (e.vault() != null) {
        referenced.add(e.vault().toAbsolutePath().normalize());
      }
    }
    int removed = 0;
    try (DirectoryStream<Path> dir = Files.newDirectoryStream(v.get().dir())) {
      for (Path p : dir) {
        Path abs = p.toAbsolutePath().normalize();
        if (Files.isRegularFile(p) && v.get().owns(abs) && !referenced.contains(abs)) {
          Files.delete(p);
          removed++;
        }
      }
    }
    return removed;
  }

  Optional<CheckpointLedger.Entry> best() {
    return ledger == null ? Optional.empty() : ledger.best();
  }

  Optional<CheckpointLedger.Entry> latest() {
    return ledger == null ? Optional.empty() : ledger.latestHealthyAtOrBefore(Long.MAX_VALUE);
  }

  int count() {
    return ledger == null ? 0 : ledger.entries().size();
  }

  /** Releases this run's claim on its glob (the run ended). */
  void close() throws IOException {
    if (claims != null) {
      claims.close();
    }
  }

  /** The ledger, for the state file (null without checkpoints). */
  CheckpointLedger ledger() {
    return ledger;
  }
}
