package dev.stepwarden.supervise;

import dev.stepwarden.audit.AuditLog;
import dev.stepwarden.audit.AuditRecord;
import dev.stepwarden.checkpoints.CheckpointLedger;
import dev.stepwarden.checkpoints.CheckpointVault;
import dev.stepwarden.engine.GuardEngine;
import dev.stepwarden.rules.GuardFile;
import java.io.IOException;
import java.nio.ByteBuffer;
import java.nio.channels.FileChannel;
import java.nio.file.Files;
import java.nio.file.Path;
import java.nio.file.StandardOpenOption;
import java.time.Instant;
import java.util.ArrayList;
import java.util.LinkedHashMap;
import java.util.List;
import java.util.Map;
import java.util.Optional;
import tools.jackson.databind.JsonNode;

/**
 * What a resumed run needs, written to {@code state.json} before each action (a launch, a
 * decision, a checkpoint, a confirmation, a crash counted) and read back by {@code run --resume}.
 * A decided relaunch is saved as {@link Planned} before it is carried out, so a supervisor killed
 * in between resumes at the decided target with the decided rate.
 */
final class Resumption {
  private Resumption() {}

  /** A decided relaunch not yet carried out. */
  record Planned(String reason, long targetStep, int skipBatches) {}

  /** The run's counters, carried over a resume. */
  record Counters(int attempt, int crashRestarts, int interventions) {}

  /**
   * One state to save.
   *
   * @param ledger null without checkpoints
   * @param planned null when no relaunch is pending
   */
  record State(boolean ended, String outcome, Instant savedAt, GuardFile.Run run,
      GuardEngine engine, Counters counters, long controlRevision, long lastStep,
      String resumeFrom, Planned planned, CheckpointLedger ledger) {}

  static void save(Path file, State s) throws IOException {
    Map<String, Object> m = new LinkedHashMap<>();
    m.put("version", StateFile.VERSION);
    m.put("saved_at", s.savedAt().toString());
    m.put("ended", s.ended());
    m.put("outcome", s.outcome());
    m.put("run", StateFile.run(s.run()));
    m.put("learning_rate", s.engine().rate());
    m.put("attempt", s.counters().attempt());
    m.put("crash_restarts", s.counters().crashRestarts());
    m.put("rewinds", s.engine().rewinds());
    m.put("interventions", s.counters().interventions());
    m.put("control_revision", s.controlRevision());
    m.put("last_step", s.lastStep());
    m.put("resume_from", s.resumeFrom());
    if (s.planned() != null) {
      Map<String, Object> p = new LinkedHashMap<>();
      p.put("reason", s.planned().reason());
      p.put("target_step", s.planned().targetStep());
      p.put("skip_batches", s.planned().skipBatches());
      m.put("planned_relaunch", p);
    }
    m.put("engine", StateFile.engine(s.engine().snapshot()));
    CheckpointLedger ledger = s.ledger();
    if (ledger != null) {
      Map<String, Object> l = new LinkedHashMap<>();
      l.put("glob", ledger.glob());
      l.put("vault_copying", ledger.vault().map(CheckpointVault::copying).orElse(false));
      l.put("entries", ledger.entries().stream().map(StateFile::entry).toList());
      l.put("seen", ledger.seen().stream().map(StateFile::seen).toList());
      m.put("ledger", l);
    }
    StateFile.write(file, m);
  }

  /** How a resumed run goes on: its counters, a relaunch decided before, where it resumes. */
  record Continued(Counters counters, Planned planned, CheckpointKeeper.Target target) {}

  /**
   * Puts a saved run back: the ledger (vault files no entry references are removed), the
   * counters and a planned relaunch, whose target wins over the latest checkpoint (a supervisor
   * killed between a rewind decision and its relaunch resumes before the trouble, not after);
   * records {@code run-resume}.
   */
  static Continued carryOn(JsonNode st, CheckpointKeeper keeper, AuditLog audit,
      GuardEngine engine, long tornBytes) throws IOException {
    Counters c = new Counters(st.path("attempt").asInt(), st.path("crash_restarts").asInt(),
        st.path("interventions").asInt());
    int orphans = 0;
    if (keeper.ledger() != null) {
      restoreLedger(st, keeper.ledger());
      orphans = keeper.removeOrphans();
    }
    Planned planned = planned(st);
    CheckpointKeeper.Target t = keeper.resumeAt(planned == null ? Long.MAX_VALUE
        : planned.targetStep());
    Optional<CheckpointLedger.Entry> e = t.entry();
    audit.append(new AuditRecord.RunResume(st.path("saved_at").asString(null),
        st.path("last_step").asLong(-1), tornBytes, engine.rate(), c.attempt(),
        engine.rewinds(), c.crashRestarts(), e.isPresent() ? t.resumeFrom() : null,
        e.map(CheckpointLedger.Entry::step).orElse(null),
        planned == null ? null : planned.reason(), orphans, e.isPresent()
            ? "continuing from the vault checkpoint of step " + e.get().step()
            : "no healthy checkpoint: starting again from scratch at the saved rate"));
    return new Continued(c, planned, t);
  }

  /** The relaunch decided before the supervisor died, if any. */
  static Planned planned(JsonNode st) {
    JsonNode p = st.path("planned_relaunch");
    return p.isObject() ? new Planned(p.path("reason").asString("resume"),
        p.path("target_step").asLong(Long.MAX_VALUE), p.path("skip_batches").asInt()) : null;
  }

  /** Puts the saved ledger back (its entries and the files it had seen). */
  private static void restoreLedger(JsonNode st, CheckpointLedger ledger) throws IOException {
    List<CheckpointLedger.Entry> entries = new ArrayList<>();
    st.path("ledger").path("entries").forEach(n -> entries.add(StateFile.entry(n)));
    List<CheckpointLedger.Seen> seen = new ArrayList<>();
    st.path("ledger").path("seen").forEach(n -> seen.add(StateFile.seen(n)));
    ledger.restore(entries, seen);
  }

  /**
   * A supervisor killed mid-append can leave a last line without its newline: cut it (our own
   * file), so the continued log has no torn record. Returns the bytes removed.
   */
  static long cutTornAuditTail(Path log) throws IOException {
    if (!Files.isRegularFile(log)) {
      return 0;
    }
    try (FileChannel ch = FileChannel.open(log, StandardOpenOption.READ,
        StandardOpenOption.WRITE)) {
      long size = ch.size();
      long keep = size;
      ByteBuffer one = ByteBuffer.allocate(1);
      while (keep > 0) {
        one.clear();
        ch.read(one, keep - 1);
        if (one.get(0) == '\n') {
          break;
        }
        keep--;
      }
      if (keep < size) {
        ch.truncate(keep);
        ch.force(true);
      }
      return size - keep;
    }
  }
}
