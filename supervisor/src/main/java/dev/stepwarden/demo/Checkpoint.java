package dev.stepwarden.demo;

import java.io.ByteArrayInputStream;
import java.io.ByteArrayOutputStream;
import java.io.DataInputStream;
import java.io.DataOutputStream;
import java.io.EOFException;
import java.io.FileOutputStream;
import java.io.IOException;
import java.nio.file.Files;
import java.nio.file.Path;
import java.nio.file.StandardCopyOption;
import java.util.Arrays;
import java.util.zip.CRC32;

/**
 * The demo trainer's checkpoint: everything needed to continue bit for bit. Binary, big-endian
 * ({@link DataOutputStream}):
 *
 * <pre>
 *   8 bytes  magic "SWDEMO\r\n" (the CR LF catches text-mode mangling)
 *   int      format version (1)
 *   long     seed            int  batch       UTF  data source ("greenhouse:SAMPLES" or "csv:PATH")
 *   int n, n x int            layer sizes
 *   long     step            long cursor (batches consumed)
 *   double   learning rate   double momentum  long control revision
 *   int n, n x double         parameters
 *   int n, n x double         momentum velocity (same length)
 *   long     CRC32 of all bytes above
 * </pre>
 *
 * There is no generator state: the batch order is a function of seed and cursor (see
 * {@link Training}).
 */
record Checkpoint(
    long seed,
    int batch,
    String dataSource,
    int[] sizes,
    long step,
    long cursor,
    double learningRate,
    double momentum,
    long controlRevision,
    double[] params,
    double[] velocity) {

  private static final byte[] MAGIC = {'S', 'W', 'D', 'E', 'M', 'O', '\r', '\n'};
  static final int VERSION = 1;

  /** The file is not a readable checkpoint of this format; the message says why. */
  static final class FormatException extends Exception {
    FormatException(String message) {
      super(message);
    }
  }

  static Checkpoint of(Training t, String dataSource) {
    return new Checkpoint(
        t.seed,
        t.batch,
        dataSource,
        t.network.sizes(),
        t.step,
        t.cursor,
        t.learningRate,
        t.momentum,
        t.controlRevision,
        t.params.clone(),
        t.velocity.clone());
  }

  byte[] toBytes() {
    ByteArrayOutputStream bytes = new ByteArrayOutputStream(64 + 16 * params.length);
    try (DataOutputStream out = new DataOutputStream(bytes)) {
      out.write(MAGIC);
      out.writeInt(VERSION);
      out.writeLong(seed);
      out.writeInt(batch);
      out.writeUTF(dataSource);
      out.writeInt(sizes.length);
      for (int s : sizes) {
        out.writeInt(s);
      }
      out.writeLong(step);
      out.writeLong(cursor);
      out.writeDouble(learningRate);
      out.writeDouble(momentum);
      out.writeLong(controlRevision);
      writeDoubles(out, params);
      writeDoubles(out, velocity);
      CRC32 crc = new CRC32();
      crc.update(bytes.toByteArray());
      out.writeLong(crc.getValue());
    } catch (IOException e) {
      throw new AssertionError("in-memory stream failed", e);
    }
    return bytes.toByteArray();
  }

  private static void writeDoubles(DataOutputStream out, double[] values) throws IOException {
    out.writeInt(values.length);
    for (double v : values) {
      out.writeDouble(v);
    }
  }

  /**
   * Writes {@code bytes} to {@code target} through a temporary sibling that is synced and then
   * renamed over the target, so a reader sees the old file or the new one, never half of one.
   * The temporary name does not end in {@code .ckpt}, so a watcher of {@code *.ckpt} skips it.
   */
  static void writeAtomically(Path target, byte[] bytes) throws IOException {
    Path tmp = target.resolveSibling("." + target.getFileName() + ".tmp");
    try (FileOutputStream out = new FileOutputStream(tmp.toFile())) {
      out.write(bytes);
      out.getFD().sync();
    }
    Files.move(tmp, target, StandardCopyOption.REPLACE_EXISTING, StandardCopyOption.ATOMIC_MOVE);
  }

  static Checkpoint read(Path file) throws IOException, FormatException {
    byte[] all = Files.readAllBytes(file);
    if (all.length < MAGIC.length + 12
        || !Arrays.equals(Arrays.copyOf(all, MAGIC.length), MAGIC)) {
      throw new FormatException(file + " is not a demo trainer checkpoint (bad magic header)");
    }
    CRC32 crc = new CRC32();
    crc.update(all, 0, all.length - 8);
    try (DataInputStream in = new DataInputStream(new ByteArrayInputStream(all))) {
      in.skipNBytes(MAGIC.length);
      int version = in.readInt();
      if (version != VERSION) {
        throw new FormatException(
            file + " has checkpoint format version " + version + "; this trainer reads " + VERSION);
      }
      long stored = readStoredCrc(all);
      if (stored != crc.getValue()) {
        throw new FormatException(file + " is damaged (checksum mismatch; truncated copy?)");
      }
      long seed = in.readLong();
      int batch = in.readInt();
      String source = in.readUTF();
      int[] sizes = new int[in.readInt()];
      for (int i = 0; i < sizes.length; i++) {
        sizes[i] = in.readInt();
      }
      long step = in.readLong();
      long cursor = in.readLong();
      double lr = in.readDouble();
      double momentum = in.readDouble();
      long revision = in.readLong();
      double[] params = readDoubles(in);
      double[] velocity = readDoubles(in);
      return new Checkpoint(
          seed, batch, source, sizes, step, cursor, lr, momentum, revision, params, velocity);
    } catch (EOFException e) {
      throw new FormatException(file + " is damaged (ends early)");
    }
  }

  private static long readStoredCrc(byte[] all) {
    long v = 0;
    for (int i = all.length - 8; i < all.length; i++) {
      v = (v << 8) | (all[i] & 0xff);
    }
    return v;
  }

  private static double[] readDoubles(DataInputStream in) throws IOException {
    int n = in.readInt();
    if (n < 0 || n > (1 << 26)) {
      throw new EOFException();
    }
    double[] v = new double[n];
    for (int i = 0; i < n; i++) {
      v[i] = in.readDouble();
    }
    return v;
  }

  static String stepFileName(long step) {
    return String.format(java.util.Locale.ROOT, "step-%06d.ckpt", step);
  }
}
