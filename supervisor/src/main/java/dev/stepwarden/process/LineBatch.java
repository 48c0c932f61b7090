package dev.stepwarden.process;

import java.nio.charset.StandardCharsets;
import java.util.Arrays;

/**
 * The complete lines one pump read produced, as UTF-8 bytes without their terminators: line
 * {@code i} is {@code length(i)} bytes of {@link #bytes()} from {@code offset(i)}. Valid only
 * during the {@link LineBatchListener#onLines} call (the pump reuses it for the next read).
 */
public final class LineBatch {
  /** Flush a batch at this many lines or bytes, so a chunk of empty lines stays bounded. */
  static final int MAX_LINES = 2048;
  static final int MAX_BYTES = 128 * 1024;

  private byte[] data = new byte[16 * 1024];
  private int[] offsets = new int[256];
  private int[] lengths = new int[256];
  private boolean[] cuts = new boolean[256];
  private int size;
  private int used;

  LineBatch() {}

  public int size() {
    return size;
  }

  public byte[] bytes() {
    return data;
  }

  public int offset(int i) {
    return offsets[i];
  }

  public int length(int i) {
    return lengths[i];
  }

  /** True when the line was cut at the line limit. */
  public boolean cut(int i) {
    return cuts[i];
  }

  /** Line {@code i} decoded (malformed bytes become U+FFFD). */
  public String text(int i) {
    return new String(data, offsets[i], lengths[i], StandardCharsets.UTF_8);
  }

  boolean full() {
    return size >= MAX_LINES || used >= MAX_BYTES;
  }

  void add(byte[] b, int off, int len, boolean cut) {
    if (size == offsets.length) {
      int n = size * 2;
      offsets = Arrays.copyOf(offsets, n);
      lengths = Arrays.copyOf(lengths, n);
      cuts = Arrays.copyOf(cuts, n);
    }
    if (used + len > data.length) {
      data = Arrays.copyOf(data, Math.max(data.length * 2, used + len));
    }
    System.arraycopy(b, off, data, used, len);
    offsets[size] = used;
    lengths[size] = len;
    cuts[size] = cut;
    size++;
    used += len;
  }

  void clear() {
    size = 0;
    used = 0;
    if (data.length > 4 * MAX_BYTES) {
      data = new byte[16 * 1024]; // a giant line's buffer is not kept for the rest of the run
    }
  }
}
