package dev.stepwarden.queue;

/** A queue request that cannot be carried out; the message names the cause and the fix. */
public final class QueueException extends Exception {
  public QueueException(String message) {
    super(message);
  }

  public QueueException(String message, Throwable cause) {
    super(message, cause);
  }
}
