package dev.stepwarden.queue;

import java.io.IOException;
import java.nio.ByteBuffer;
import java.nio.channels.FileChannel;
import java.nio.channels.FileLock;
import java.nio.channels.OverlappingFileLockException;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.nio.file.StandardOpenOption;
import java.time.Instant;
import java.util.function.BooleanSupplier;
import java.util.function.Consumer;

/**
 * One supervisor per queued job's run directories: an OS lock on {@code BASE.lock} next to them,
 * held while a node runs (or resumes) the job. A node that takes a job over from one it believes
 * dead waits here until that one has really let go (a frozen node holds it until it wakes up and
 * fences itself, a killed one frees it at once), so two supervisors never write one run
 * directory. On shared storage the lock is the file system's (NFSv4 locks, or lockd for NFSv3).
 */
final class RunLock implements AutoCloseable {
  private final FileChannel channel;
  private final FileLock lock;

  private RunLock(FileChannel channel, FileLock lock) {
    this.channel = channel;
    this.lock = lock;
  }

  static Path file(Path base) {
    return base.resolveSibling(base.getFileName() + ".lock");
  }

  /**
   * Takes the lock, waiting while another holds it; {@code waiting} hears once who holds it.
   * Returns null when {@code giveUp} says so first.
   */
  static RunLock acquire(Path base, String node, Consumer<String> waiting, BooleanSupplier giveUp)
      throws IOException, InterruptedException {
    Path p = file(base);
    Home.privateDirectories(p.getParent());
    Home.privateFile(p);
    boolean told = false;
    while (true) {
      FileChannel ch = FileChannel.open(p, StandardOpenOption.READ, StandardOpenOption.WRITE);
      FileLock l;
      try {
        l = ch.tryLock();
      } catch (OverlappingFileLockException sameProcess) {
        l = null;
      }
      if (l != null) {
        String who = "{\"node\":\"" + node + "\",\"pid\":" + ProcessHandle.current().pid()
            + ",\"host\":\"" + Home.hostName() + "\",\"since\":\"" + Instant.now() + "\"}\n";
        ch.truncate(0);
        ch.write(ByteBuffer.wrap(who.getBytes(StandardCharsets.UTF_8)), 0);
        ch.force(false);
        return new RunLock(ch, l);
      }
      ch.close();
      if (!told) {
        waiting.accept(Files.readString(p, StandardCharsets.UTF_8).strip());
        told = true;
      }
      if (giveUp.getAsBoolean()) {
        return null;
      }
      Thread.sleep(250);
    }
  }

  @Override
  public void close() {
    try {
      lock.release();
      channel.close();
    } catch (IOException ignored) {
      // closing the channel frees the lock in any case
    }
  }
}
