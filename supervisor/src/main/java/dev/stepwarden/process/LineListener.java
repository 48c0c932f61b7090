package dev.stepwarden.process;

/**
 * Receives each complete line the trainer writes, without its line terminator.
 *
 * <p>Called on the delivery thread of the line's stream: lines of one stream arrive in order, but
 * the stdout and stderr pumps call concurrently, so an implementation that keeps state across both
 * streams must be thread-safe. A few MiB of read lines may wait for a busy listener; a listener
 * slower than the trainer for longer slows only its own stream (the trainer then blocks on that
 * full pipe), so keep the work short or hand it off. An exception thrown here is
 * recorded (see {@link TrainerProcess#firstPumpFailure()}) and the pump keeps draining.
 */
@FunctionalInterface
public interface LineListener {
  void onLine(TrainerStream stream, String line);
}
