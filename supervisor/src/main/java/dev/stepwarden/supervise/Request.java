package dev.stepwarden.supervise;

import dev.stepwarden.engine.Decision;

/**
 * What pump threads, signal handlers and the parts ask of the supervising thread: everything that
 * stops a trainer (stopping waits for the pumps to drain, so it never runs on a pump thread).
 */
sealed interface Request {
  /** End the run (a guard's ending, or the supervisor giving up: {@code decision} null). */
  record End(Decision decision, Long decisionSeq) implements Request {}

  /** Stop the trainer and launch the next generation from a checkpoint at or before a step. */
  record Relaunch(String reason, Long decisionSeq, long targetStep, int skipBatches)
      implements Request {}

  /** Pre-emption: ask for a checkpoint, stop, suspend. */
  record Preempt(String why) implements Request {}

  /** A validation value arrived: the trainer typically saves right after it evaluates. */
  record Scan() implements Request {}

  /** The trainer exited and its output drained: look now rather than at the next tick. */
  record Wake() implements Request {}
}
