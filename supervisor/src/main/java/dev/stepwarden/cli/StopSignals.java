package dev.stepwarden.cli;

import dev.stepwarden.process.TrainerProcess;
import dev.stepwarden.supervise.Signals;
import java.io.PrintWriter;
import java.util.Locale;
import java.util.concurrent.atomic.AtomicInteger;
import java.util.function.Consumer;

/**
 * SIGTERM and SIGINT for a command that stops in order ({@code run}, {@code serve}), taken from
 * the JVM's default (which would run every shutdown hook at once, libraries' hooks too).
 *
 * <p>The first signal records its exit code (143 for TERM, 130 for INT) and starts the stop on a
 * thread of its own, so the signal thread returns at once and a second signal can arrive. The
 * second makes every trainer's stop skip the rest of its grace ({@link TrainerProcess#hurryAll});
 * no thread is interrupted, so no audit write in progress is cut. Where the handlers cannot be
 * installed ({@code -Xrs}, no {@code jdk.unsupported}) the command's shutdown hook stops instead.
 */
final class StopSignals implements AutoCloseable {
  /** The first signal's exit code; 0 before one arrived. */
  private final AtomicInteger exit = new AtomicInteger();
  private final Consumer<String> stop;
  private final String threadName;
  private final PrintWriter console;
  private final String first;
  private final String again;
  private final Runnable restoreTerm;
  private final Runnable restoreInt;

  /**
   * @param stop the orderly stop, given the signal's name ({@code SIGTERM} or {@code SIGINT});
   *     it runs on a new thread named {@code threadName}
   * @param first what to print on the first signal ({@code %s}: the signal's name), or null
   * @param again what to print on a second one ({@code %s}: the signal's name)
   */
  private StopSignals(Consumer<String> stop, String threadName, PrintWriter console, String first,
      String again) {
    this.stop = stop;
    this.threadName = threadName;
    this.console = console;
    this.first = first;
    this.again = again;
    this.restoreTerm = Signals.replace("TERM", () -> signalled("SIGTERM", 143));
    this.restoreInt = Signals.replace("INT", () -> signalled("SIGINT", ExitCodes.INTERRUPTED));
  }

  /** Takes TERM and INT until {@link #close()}; see the parameters of the constructor. */
  static StopSignals take(Consumer<String> stop, String threadName, PrintWriter console,
      String first, String again) {
    return new StopSignals(stop, threadName, console, first, again);
  }

  /** 143 or 130 once a signal arrived, else 0. */
  int exitCode() {
    return exit.get();
  }

  private void signalled(String name, int code) {
    if (!exit.compareAndSet(0, code)) {
      say(again, name);
      TrainerProcess.hurryAll();
      return;
    }
    say(first, name);
    new Thread(() -> stop.accept(name), threadName).start();
  }

  private void say(String format, String name) {
    if (format != null) {
      console.println(String.format(Locale.ROOT, format, name));
      console.flush();
    }
  }

  /** Puts the previous handlers back. */
  @Override
  public void close() {
    if (restoreTerm != null) {
      restoreTerm.run();
    }
    if (restoreInt != null) {
      restoreInt.run();
    }
  }
}
