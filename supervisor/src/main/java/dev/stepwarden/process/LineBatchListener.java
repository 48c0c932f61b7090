package dev.stepwarden.process;

/**
 * A {@link LineListener} that can take the lines of one pump read at once, as bytes: one call
 * (and, for the caller, one lock acquisition) per read instead of per line, and no string per
 * line. The pump calls {@link #onLines} only. Same threading and failure rules as
 * {@link LineListener}. Implement it as a class, not a lambda: a lambda passed where a
 * {@code LineListener} is expected would become a per-line listener.
 */
public interface LineBatchListener extends LineListener {
  void onLines(TrainerStream stream, LineBatch lines);

  /** Not called by the pump; a batch listener takes its lines through {@link #onLines}. */
  @Override
  default void onLine(TrainerStream stream, String line) {
    throw new UnsupportedOperationException("a LineBatchListener takes lines through onLines");
  }
}
