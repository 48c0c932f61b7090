package dev.stepwarden.checkpoints;

import java.io.IOException;
import java.nio.file.FileAlreadyExistsException;
import java.nio.file.FileSystemException;
import java.nio.file.Files;
import java.nio.file.Path;
import java.nio.file.StandardCopyOption;
import java.nio.file.attribute.BasicFileAttributes;
import java.util.Locale;
import java.util.Objects;

/**
 * The vault: our own copies of healthy checkpoints, inside the run directory, so that a trainer
 * that rotates, deletes or overwrites its checkpoint files cannot destroy a rewind target.
 *
 * <p>Design: a copy is a hard link when the vault and the checkpoint share a file system (no
 * bytes copied, instant even for many gigabytes), else a real copy (written to a temporary name
 * and renamed, so a half-copied file never carries a vault name). A hard link survives the
 * trainer's delete and its write-new-then-rename overwrite, but not an overwrite in place (open,
 * truncate, write) since both names share the same bytes: {@link CheckpointLedger} detects that
 * case from the file identity and switches the vault to copies. The vault only ever deletes
 * files it created itself, inside its own folder.
 */
public final class CheckpointVault {
  private final Path dir;
  private final int keep;
  private boolean copying;

  /**
   * @param dir the vault folder (created if missing)
   * @param keep how many of the latest healthy checkpoints to keep, besides the best
   * @param copyOnly always copy, never hard-link
   */
  public CheckpointVault(Path dir, int keep, boolean copyOnly) {
    this.dir = dir.toAbsolutePath().normalize();
    if (keep < 1) {
      throw new IllegalArgumentException("the vault must keep at least 1 checkpoint, not " + keep);
    }
    this.keep = keep;
    this.copying = copyOnly;
  }

  public Path dir() {
    return dir;
  }

  public int keep() {
    return keep;
  }

  /** True once the vault copies bytes instead of linking (asked for, or an in-place writer seen). */
  public boolean copying() {
    return copying;
  }

  /** From now on copy instead of linking. */
  void copyFromNowOn() {
    copying = true;
  }

  /** Whether {@code p} is a file this vault may delete: inside its folder, never elsewhere. */
  public boolean owns(Path p) {
    Path n = p.toAbsolutePath().normalize();
    return n.startsWith(dir) && !n.equals(dir);
  }

  /** A kept file: where it is and whether it shares the original's bytes. */
  record Kept(Path path, boolean linked, Object fileKey) {}

  /** Links (or copies) {@code source} into the vault under a name carrying its step. */
  Kept keep(Path source, long step) throws IOException {
    Files.createDirectories(dir);
    Path target = freeName(source, step);
    if (!copying) {
      try {
        Files.createLink(target, source);
        Object key = Files.readAttributes(target, BasicFileAttributes.class).fileKey();
        return new Kept(target, true, key);
      } catch (UnsupportedOperationException | FileSystemException e) {
        // another file system (EXDEV), or links not supported: copy instead, below
        if (e instanceof FileAlreadyExistsException) {
          throw (FileAlreadyExistsException) e;
        }
      }
    }
    Path tmp = dir.resolve("." + target.getFileName() + ".partial");
    Files.deleteIfExists(tmp); // ours: a copy interrupted by an earlier crash
    Files.copy(source, tmp, StandardCopyOption.REPLACE_EXISTING);
    Files.move(tmp, target, StandardCopyOption.ATOMIC_MOVE);
    return new Kept(target, false, null);
  }

  /** Deletes one of our own copies; refuses anything outside the vault. */
  boolean remove(Path vaultCopy) throws IOException {
    Objects.requireNonNull(vaultCopy, "vaultCopy");
    if (!owns(vaultCopy)) {
      throw new IllegalArgumentException("refusing to delete " + vaultCopy
          + ": it is not inside the vault " + dir);
    }
    return Files.deleteIfExists(vaultCopy);
  }

  private Path freeName(Path source, long step) {
    // The original name stays last, so a trainer that checks the file extension still accepts it.
    String stem = String.format(Locale.ROOT, "step-%09d", Math.max(step, 0));
    Path p = dir.resolve(stem + "--" + source.getFileName());
    for (int i = 2; Files.exists(p, java.nio.file.LinkOption.NOFOLLOW_LINKS); i++) {
      p = dir.resolve(stem + "-" + i + "--" + source.getFileName());
    }
    return p;
  }
}
