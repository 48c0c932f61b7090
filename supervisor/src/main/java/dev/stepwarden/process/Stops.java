package dev.stepwarden.process;

import java.util.ArrayList;
import java.util.Collection;
import java.util.List;

/**
 * Runs several stops at once and waits for them all. A stop may take its trainer's whole grace
 * (TERM, then KILL only when the grace is over), so stops made one after the other add up: four
 * runs with a 30 s grace would take two minutes where one grace is enough.
 */
public final class Stops {
  private Stops() {}

  /**
   * Runs each of {@code stops} on a thread of its own and returns when all have ended, or at
   * once when the calling thread is interrupted (its flag is kept; the stops go on).
   */
  public static void allAtOnce(Collection<? extends Runnable> stops) {
    List<Thread> threads = new ArrayList<>(stops.size());
    for (Runnable stop : stops) {
      Thread t = new Thread(stop, "stepwarden-stop");
      t.setDaemon(true);
      t.start();
      threads.add(t);
    }
    for (Thread t : threads) {
      try {
        t.join();
      } catch (InterruptedException e) {
        Thread.currentThread().interrupt();
        return;
      }
    }
  }
}
