package dev.stepwarden.process;

import java.nio.file.Path;
import java.time.Duration;
import java.util.concurrent.CountDownLatch;
import java.util.concurrent.TimeUnit;
import java.util.concurrent.atomic.AtomicReference;

/**
 * A minimal supervisor JVM for the tests that end a supervisor: it starts a trainer through
 * {@link TrainerProcess}, prints {@code trainer=PID} and then either waits to be SIGKILLed
 * ({@code sigkill}) or exits normally ({@code exit MARKER}).
 */
public final class SupervisorStandIn {
  private SupervisorStandIn() {}

  public static void main(String[] args) throws Exception {
    Path here = Path.of("").toAbsolutePath();
    if (args[0].equals("sigkill")) {
      // The ticker is a grandchild that keeps writing: it must die of SIGPIPE once we are gone.
      String script = "(while :; do echo tick; sleep 0.1; done) & echo \"ticker=$!\"; exec sleep 120";
      LaunchSpec spec = LaunchSpec.builder().command("/bin/sh", "-c", script)
          .workingDirectory(here).echo(false).build();
      CountDownLatch ticker = new CountDownLatch(1);
      LineListener l = (s, line) -> {
        if (line.startsWith("ticker=")) {
          System.out.println(line);
          System.out.flush();
          ticker.countDown();
        }
      };
      // Started from a thread that ends at once: the binding must survive it.
      AtomicReference<TrainerProcess> box = new AtomicReference<>();
      Thread t = new Thread(() -> {
        try {
          box.set(TrainerProcess.start(spec, l));
        } catch (Exception e) {
          e.printStackTrace();
        }
      });
      t.start();
      t.join();
      ticker.await(10, TimeUnit.SECONDS);
      System.out.println("trainer=" + box.get().pid());
      System.out.flush();
      Thread.sleep(120_000); // a safety net: the test SIGKILLs us long before
    } else if (args[0].equals("exit")) {
      String script = "trap \"echo term > '" + args[1] + "'; exit 0\" TERM; echo ready; "
          + "while :; do sleep 0.1; done";
      LaunchSpec spec = LaunchSpec.builder().command("/bin/sh", "-c", script)
          .workingDirectory(here).echo(false).stopGrace(Duration.ofSeconds(5)).build();
      CountDownLatch ready = new CountDownLatch(1);
      TrainerProcess tp = TrainerProcess.start(spec, (s, line) -> {
        if (line.equals("ready")) {
          ready.countDown();
        }
      });
      ready.await(10, TimeUnit.SECONDS);
      System.out.println("trainer=" + tp.pid());
      System.out.flush();
      System.exit(0); // the shutdown hook must stop the trainer gracefully
    } else {
      throw new IllegalArgumentException("mode must be sigkill or exit, was " + args[0]);
    }
  }
}
