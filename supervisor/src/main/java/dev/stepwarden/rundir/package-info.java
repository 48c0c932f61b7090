/**
 * The run directory's contract: which process owns a run directory while it runs (the OS lock of
 * {@link dev.stepwarden.rundir.RunLock}), so a second supervisor, a resume or a fencing cluster
 * node can tell a live run from a dead one.
 */
package dev.stepwarden.rundir;
