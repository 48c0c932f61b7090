package dev.stepwarden.audit;

import java.util.LinkedHashMap;
import java.util.List;
import java.util.Map;

/**
 * One record of the audit log, as a typed value: each record type is one record class here, so a
 * field is named once and a record cannot be written half-filled. {@link #fields()} gives the
 * JSON keys in their written order (the log adds {@code seq}, {@code at} and {@code type}); a
 * {@code null} component is written as JSON null unless its record says it is left out.
 */
public sealed interface AuditRecord {
  /** The record's {@code type} in the log. */
  String type();

  /** The record's keys and values, in the order they are written. */
  Map<String, Object> fields();

  /** A run began: what runs, where, with which guards. */
  record RunStart(String name, List<String> command, String workdir, String rules,
      String runDir, double learningRate, String steer, List<String> guards)
      implements AuditRecord {
    @Override
    public String type() {
      return "run-start";
    }

    @Override
    public Map<String, Object> fields() {
      return new Fields().put("name", name).put("command", command).put("workdir", workdir)
          .put("rules", rules).put("run_dir", runDir).put("learning_rate", learningRate)
          .put("steer", steer).put("guards", guards).map;
    }
  }

  /** The rate probe's reading and the starting rate it gave. */
  record Probe(long steps, boolean found, Double lower, Double upper, double learningRate,
      String note, Object levels) implements AuditRecord {
    @Override
    public String type() {
      return "probe";
    }

    @Override
    public Map<String, Object> fields() {
      return new Fields().put("steps", steps).put("found", found).put("lower", lower)
          .put("upper", upper).put("learning_rate", learningRate).put("note", note)
          .put("levels", levels).map;
    }
  }

  /** A run continued by {@code run --resume}, and from where. */
  record RunResume(String stateSavedAt, long lastStepBefore, long tornAuditBytesRemoved,
      double learningRate, int attemptsBefore, int rewindsBefore, int crashRestartsBefore,
      String resumeFrom, Long resumeStep, String plannedRelaunch, int orphansRemoved,
      String result) implements AuditRecord {
    @Override
    public String type() {
      return "run-resume";
    }

    @Override
    public Map<String, Object> fields() {
      return new Fields().put("state_saved_at", stateSavedAt)
          .put("last_step_before", lastStepBefore)
          .put("torn_audit_bytes_removed", tornAuditBytesRemoved)
          .put("learning_rate", learningRate).put("attempts_before", attemptsBefore)
          .put("rewinds_before", rewindsBefore).put("crash_restarts_before", crashRestartsBefore)
          .put("resume_from", resumeFrom).put("resume_step", resumeStep)
          .put("planned_relaunch", plannedRelaunch)
          .put("vault_orphans_removed", orphansRemoved).put("result", result).map;
    }
  }

  /** A vault copy that no longer matches its hash and is not used. */
  record VaultWarning(String path, long step, String message) implements AuditRecord {
    @Override
    public String type() {
      return "vault-warning";
    }

    @Override
    public Map<String, Object> fields() {
      return new Fields().put("path", path).put("step", step).put("message", message).map;
    }
  }

  /** The run directory failed the supervisor; the trainer was stopped. */
  record SupervisorFailure(String error, boolean trainerStopped, String note)
      implements AuditRecord {
    @Override
    public String type() {
      return "supervisor-failure";
    }

    @Override
    public Map<String, Object> fields() {
      return new Fields().put("error", error).put("trainer_stopped", trainerStopped)
          .put("note", note).map;
    }
  }

  /** A stop signal arrived. */
  record Interrupted(String signal, long step, Double learningRate, String action)
      implements AuditRecord {
    @Override
    public String type() {
      return "interrupted";
    }

    @Override
    public Map<String, Object> fields() {
      return new Fields().put("signal", signal).put("step", step)
          .put("learning_rate", learningRate).put("action", action).map;
    }
  }

  /** SIGHUP: recorded, the run goes on. */
  record Hangup(long step) implements AuditRecord {
    @Override
    public String type() {
      return "hangup";
    }

    @Override
    public Map<String, Object> fields() {
      return new Fields().put("signal", "SIGHUP").put("step", step)
          .put("action", "none: the run goes on (stop it with SIGINT or SIGTERM)").map;
    }
  }

  /** A trainer was launched: one generation begins. */
  record Launch(int attempt, String reason, long pid, List<String> argv, double learningRate,
      long controlRevision, String resumeFrom, int skipBatches) implements AuditRecord {
    @Override
    public String type() {
      return "launch";
    }

    @Override
    public Map<String, Object> fields() {
      return new Fields().put("attempt", attempt).put("reason", reason).put("pid", pid)
          .put("argv", argv).put("learning_rate", learningRate)
          .put("control_revision", controlRevision).put("resume_from", resumeFrom)
          .put("skip_batches", skipBatches).map;
    }
  }

  /**
   * The trainer confirmed a rate.
   *
   * @param confirmedFor {@code "launch N"} or {@code "live change"}
   * @param by {@code "applied_revision"} or {@code "reported rate"}
   */
  record Confirmed(Long decisionSeq, String confirmedFor, long revision, double learningRate,
      long afterMs, String by) implements AuditRecord {
    @Override
    public String type() {
      return "confirmed";
    }

    @Override
    public Map<String, Object> fields() {
      return new Fields().put("decision_seq", decisionSeq).put("for", confirmedFor)
          .put("revision", revision).put("learning_rate", learningRate).put("after_ms", afterMs)
          .put("by", by).map;
    }
  }

  /** A rate was not confirmed in time: both rates, and what follows. */
  record NotConfirmed(Long decisionSeq, String confirmedFor, long revision, double learningRate,
      Double reportedRate, long waitedMs, String fallback) implements AuditRecord {
    @Override
    public String type() {
      return "not-confirmed";
    }

    @Override
    public Map<String, Object> fields() {
      return new Fields().put("decision_seq", decisionSeq).put("for", confirmedFor)
          .put("revision", revision).put("learning_rate", learningRate)
          .put("reported_rate", reportedRate).put("waited_ms", waitedMs)
          .put("fallback", fallback).map;
    }
  }

  /** Something the user should know (keys never found, ...). */
  record Warning(long afterLines, String message) implements AuditRecord {
    @Override
    public String type() {
      return "warning";
    }

    @Override
    public Map<String, Object> fields() {
      return new Fields().put("after_lines", afterLines).put("message", message).map;
    }
  }

  /** A guard fired; written (and forced) before the action. {@code note} is left out if empty. */
  record Decided(long step, String guard, String detector, String evidence,
      Map<String, Object> figures, List<String> action, double rateBefore, double rateAfter,
      String ending, String note) implements AuditRecord {
    @Override
    public String type() {
      return "decision";
    }

    @Override
    public Map<String, Object> fields() {
      Fields f = new Fields().put("step", step).put("guard", guard).put("detector", detector)
          .put("evidence", evidence).put("figures", figures).put("action", action)
          .put("rate_before", rateBefore).put("rate_after", rateAfter).put("ending", ending);
      return (note == null || note.isEmpty() ? f : f.put("note", note)).map;
    }
  }

  /** A live rate change was written to the control file. */
  record RateWritten(long decisionSeq, long revision, double learningRate)
      implements AuditRecord {
    @Override
    public String type() {
      return "outcome";
    }

    @Override
    public Map<String, Object> fields() {
      return new Fields().put("decision_seq", decisionSeq)
          .put("result", "control file revision " + revision + " written")
          .put("revision", revision).put("learning_rate", learningRate).map;
    }
  }

  /** A generation was ended for a relaunch (rewind, restart, crash, hang); from where it goes on. */
  record Relaunched(String reason, Long decisionSeq, boolean trainerKilled, String resumeFrom,
      Long resumeStep, String checkpointOriginal, String sha256, long targetStep,
      int checkpointsAbandoned, double learningRate, String result) implements AuditRecord {
    @Override
    public String type() {
      return "outcome";
    }

    @Override
    public Map<String, Object> fields() {
      return new Fields().put("reason", reason).put("decision_seq", decisionSeq)
          .put("trainer_killed", trainerKilled).put("resume_from", resumeFrom)
          .put("resume_step", resumeStep).put("checkpoint_original", checkpointOriginal)
          .put("sha256", sha256).put("target_step", targetStep)
          .put("checkpoints_abandoned", checkpointsAbandoned).put("learning_rate", learningRate)
          .put("result", result).map;
    }
  }

  /** The run was ended by a decision or a limit ("stopped early" or "gave up"). */
  record Ended(String result, boolean trainerKilled) implements AuditRecord {
    @Override
    public String type() {
      return "outcome";
    }

    @Override
    public Map<String, Object> fields() {
      return new Fields().put("result", result).put("trainer_killed", trainerKilled).map;
    }
  }

  /** A checkpoint settled and was kept (or judged). */
  record Checkpoint(String path, long step, String stepFrom, long size, String sha256,
      Object train, Object validation, boolean healthy, String vault, String vaultBy)
      implements AuditRecord {
    @Override
    public String type() {
      return "checkpoint";
    }

    @Override
    public Map<String, Object> fields() {
      return new Fields().put("path", path).put("step", step).put("step_from", stepFrom)
          .put("size", size).put("sha256", sha256).put("train", train).put("validation", validation)
          .put("healthy", healthy).put("vault", vault).put("vault_by", vaultBy).map;
    }
  }

  /** Vault copies beyond {@code checkpoints.keep} were removed (our own files). */
  record VaultPruned(List<String> removed, List<String> kept) implements AuditRecord {
    @Override
    public String type() {
      return "vault-pruned";
    }

    @Override
    public Map<String, Object> fields() {
      return new Fields().put("removed", removed).put("kept", kept).map;
    }
  }

  /** The trainer went quiet past the limit. */
  record Silence(long quietMs, long limitMs, long step, boolean beforeFirstMetric)
      implements AuditRecord {
    @Override
    public String type() {
      return "silence";
    }

    @Override
    public Map<String, Object> fields() {
      return new Fields().put("quiet_ms", quietMs).put("limit_ms", limitMs).put("step", step)
          .put("before_first_metric", beforeFirstMetric).map;
    }
  }

  /** The trainer exited with a non-zero code; {@code outOfMemory} and {@code note} when known. */
  record Crash(int exitCode, long step, String outOfMemory, String note, List<String> stderrTail)
      implements AuditRecord {
    @Override
    public String type() {
      return "crash";
    }

    @Override
    public Map<String, Object> fields() {
      Fields f = new Fields().put("exit_code", exitCode).put("step", step);
      if (outOfMemory != null) {
        f.put("out_of_memory", outOfMemory);
      } else if (note != null) {
        f.put("note", note);
      }
      return f.put("stderr_tail", stderrTail).map;
    }
  }

  /** The trainer exited by itself with code 0. */
  record TrainerExit(int exitCode, long step) implements AuditRecord {
    @Override
    public String type() {
      return "trainer-exit";
    }

    @Override
    public Map<String, Object> fields() {
      return new Fields().put("exit_code", exitCode).put("step", step).map;
    }
  }

  /** Pre-emption began: the trainer was asked for a checkpoint. */
  record Preempt(String why, long step, long waitMs, String askedBy) implements AuditRecord {
    @Override
    public String type() {
      return "preempt";
    }

    @Override
    public Map<String, Object> fields() {
      return new Fields().put("why", why).put("step", step).put("wait_ms", waitMs)
          .put("asked_by", askedBy).map;
    }
  }

  /** Pre-emption ended: the trainer stopped, the state saved. */
  record Preempted(boolean newCheckpoint, String resumeWillUse, Long resumeStep,
      boolean trainerKilled, int exitCode, String result) implements AuditRecord {
    @Override
    public String type() {
      return "preempted";
    }

    @Override
    public Map<String, Object> fields() {
      return new Fields().put("new_checkpoint", newCheckpoint)
          .put("resume_will_use", resumeWillUse).put("resume_step", resumeStep)
          .put("trainer_killed", trainerKilled).put("exit_code", exitCode)
          .put("result", result).map;
    }
  }

  /** The run ended ({@code run-end}) or was suspended for a resume ({@code run-suspended}). */
  record RunEnd(boolean suspended, String outcome, int exitCode, String reason,
      int interventions, double finalLearningRate, Double bestValidation,
      long bestValidationStep, String bestCheckpoint, Long bestCheckpointStep,
      String bestCheckpointOriginal, long lines, long metricLines, long ignoredLines,
      long oversizedLines) implements AuditRecord {
    @Override
    public String type() {
      return suspended ? "run-suspended" : "run-end";
    }

    @Override
    public Map<String, Object> fields() {
      return new Fields().put("outcome", outcome).put("exit_code", exitCode)
          .put("reason", reason).put("interventions", interventions)
          .put("final_learning_rate", finalLearningRate).put("best_validation", bestValidation)
          .put("best_validation_step", bestValidationStep)
          .put("best_checkpoint", bestCheckpoint)
          .put("best_checkpoint_step", bestCheckpointStep)
          .put("best_checkpoint_original", bestCheckpointOriginal).put("lines", lines)
          .put("metric_lines", metricLines).put("ignored_lines", ignoredLines)
          .put("oversized_lines", oversizedLines).map;
    }
  }

  /**
   * A notice of the checkpoint ledger, whose own package names its type and fields (a file
   * that changed under an earlier step, the vault switching to copies, ...).
   */
  record LedgerNotice(String type, Map<String, Object> fields) implements AuditRecord {
    public LedgerNotice {
      fields = new LinkedHashMap<>(fields);
    }

    @Override
    public Map<String, Object> fields() {
      return new LinkedHashMap<>(fields);
    }
  }
}
