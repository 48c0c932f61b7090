/**
 * Checkpoints: {@link dev.stepwarden.checkpoints.CheckpointLedger} watches the trainer's
 * checkpoint files, takes each only when complete ({@link dev.stepwarden.checkpoints.WriterProbe}:
 * no process holds it open for writing) and only when it is this run's
 * ({@link dev.stepwarden.checkpoints.WatchClaims}: the live runs' claims on shared globs), gives
 * each the step it appeared at (and where that step came from) and its health, and chooses
 * rollback targets; {@link dev.stepwarden.checkpoints.CheckpointVault} keeps our own links or
 * copies of them in the run directory.
 */
package dev.stepwarden.checkpoints;
