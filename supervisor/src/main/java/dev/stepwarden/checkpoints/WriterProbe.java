package dev.stepwarden.checkpoints;

import java.io.IOException;
import java.nio.file.DirectoryStream;
import java.nio.file.Files;
import java.nio.file.Path;
import java.nio.file.attribute.BasicFileAttributes;
import java.util.HashMap;
import java.util.HashSet;
import java.util.Map;
import java.util.Set;
import java.util.function.LongSupplier;
import java.util.regex.Matcher;
import java.util.regex.Pattern;

/**
 * Which files are open for writing right now, and whether a process of the trainer's tree is
 * among their writers, so that a checkpoint still being written (a trainer stalled between
 * chunks on slow storage) is never taken however long its size stays the same, and a file only
 * another run's trainer writes is known not to be ours.
 *
 * <p>Linux shows every open file of a process under {@code /proc/PID/fd} (a link to the file)
 * with its open flags in {@code /proc/PID/fdinfo/FD}; a descriptor opened write-only or
 * read-write ({@code O_WRONLY}, {@code O_RDWR}) counts. Every process this user may look into is
 * read (a few hundred in a container; only while a checkpoint is pending). Files are compared by
 * identity (device and inode), not by name. Where {@code /proc} is missing (not Linux) the probe
 * reports nothing and the ledger relies on its settle window alone.
 */
public interface WriterProbe {
  /**
   * The identities ({@link BasicFileAttributes#fileKey()}) of files open for writing now, each
   * with whether a process of the trainer's tree is one of its writers.
   */
  Map<Object, Boolean> openForWriting();

  /** A probe that sees nothing: the settle window alone decides. */
  WriterProbe NONE = Map::of;

  /**
   * The probe of every visible process, the tree under {@code rootPid} (the trainer; its
   * children, data loader workers, saver threads) marked as ours. A pid of -1 marks none.
   */
  static WriterProbe ofTree(LongSupplier rootPid) {
    return () -> {
      Path proc = Path.of("/proc");
      if (!Files.isDirectory(proc.resolve("self/fd"))) {
        return Map.of();
      }
      Set<Long> ours = new HashSet<>();
      long pid = rootPid.getAsLong();
      if (pid > 0) {
        ours.add(pid);
        ProcessHandle.of(pid).ifPresent(h -> h.descendants().forEach(d -> ours.add(d.pid())));
      }
      Map<Object, Boolean> keys = new HashMap<>();
      try (DirectoryStream<Path> ds = Files.newDirectoryStream(proc, "[0-9]*")) {
        for (Path p : ds) {
          long each;
          try {
            each = Long.parseLong(p.getFileName().toString());
          } catch (NumberFormatException e) {
            continue;
          }
          boolean mine = ours.contains(each);
          for (Object key : ProcFd.writable(each)) {
            keys.merge(key, mine, Boolean::logicalOr);
          }
        }
      } catch (IOException | RuntimeException e) {
        // /proc unreadable: nothing seen
      }
      return keys;
    };
  }

  /** Reading {@code /proc/PID/fd} and {@code fdinfo}. */
  final class ProcFd {
    private static final Pattern FLAGS = Pattern.compile("(?m)^flags:\\s*([0-7]+)");
    private static final int ACCESS_MODE = 3; // O_ACCMODE: 0 read, 1 write, 2 read-write

    private ProcFd() {}

    static Set<Object> writable(long pid) {
      Set<Object> into = new HashSet<>();
      Path fds = Path.of("/proc", Long.toString(pid), "fd");
      try (DirectoryStream<Path> ds = Files.newDirectoryStream(fds)) {
        for (Path fd : ds) {
          try {
            Path target = Files.readSymbolicLink(fd);
            if (!target.isAbsolute() || target.startsWith("/dev") || target.startsWith("/proc")) {
              continue; // pipe:[..], socket:[..], anon_inode:.., terminals
            }
            String info = Files.readString(Path.of("/proc", Long.toString(pid), "fdinfo",
                fd.getFileName().toString()));
            Matcher m = FLAGS.matcher(info);
            if (!m.find() || (Integer.parseInt(m.group(1), 8) & ACCESS_MODE) == 0) {
              continue;
            }
            BasicFileAttributes a = Files.readAttributes(fd, BasicFileAttributes.class);
            if (a.isRegularFile() && a.fileKey() != null) {
              into.add(a.fileKey());
            }
          } catch (IOException | RuntimeException e) {
            // the descriptor closed while we looked: it no longer writes anything
          }
        }
      } catch (IOException | RuntimeException e) {
        // the process ended or is not ours to see (another user): nothing to report
      }
      return into;
    }
  }
}
