/**
 * Dry runs: {@link dev.stepwarden.replay.Replay} feeds a recorded metrics file through the
 * same guard engine a live run uses, and {@link dev.stepwarden.replay.ReplayText} prints what it
 * would have done.
 */
package dev.stepwarden.replay;
