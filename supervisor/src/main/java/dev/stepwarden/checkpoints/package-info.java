/**
 * Checkpoints: {@link dev.stepwarden.checkpoints.CheckpointLedger} watches the trainer's
 * checkpoint files, gives each the step it appeared at and its health, and chooses rollback
 * targets; {@link dev.stepwarden.checkpoints.CheckpointVault} keeps our own links or copies of
 * them in the run directory.
 */
package dev.stepwarden.checkpoints;
