package dev.stepwarden.supervise;

import java.time.Duration;

/**
 * How the trainer is asked for a last checkpoint when the supervisor is pre-empted.
 *
 * @param signal a signal name to forward to the trainer (USR1, TERM, ...), or null to write
 *     {@code "checkpoint_request"} into the control file
 * @param patience how long to wait for a new checkpoint to settle before stopping the trainer
 */
public record Preemption(String signal, Duration patience) {
  public static final Preemption DEFAULT = new Preemption(null, Duration.ofSeconds(30));

  public Preemption {
    if (signal != null && !signal.matches("[A-Z0-9]+")) {
      throw new IllegalArgumentException("signal name '" + signal + "': give it like USR1 or"
          + " TERM (upper case, without SIG)");
    }
    patience = patience == null ? Duration.ofSeconds(30) : patience;
  }
}
