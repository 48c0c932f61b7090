package dev.stepwarden.process;

/**
 * A {@link LineListener} that can take the lines of one pump read at once, as bytes: one call
 * (and, for the caller, one lock acquisition) per read instead of per line, and no string per
 * line. The pump calls {@link #onLines} only; {@link #onLine} stays for callers that feed lines
 * one by one. Same threading and failure rules as {@link LineListener}.
 */
public interface LineBatchListener extends LineListener {
  void onLines(TrainerStream stream, LineBatch lines);
}
