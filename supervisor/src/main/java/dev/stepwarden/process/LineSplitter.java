package dev.stepwarden.process;

import java.lang.invoke.MethodHandles;
import java.lang.invoke.VarHandle;
import java.nio.ByteOrder;

/**
 * Cuts a byte stream into lines, chunk by chunk, with bounded memory.
 *
 * <p>Rules: a line ends at {@code '\n'}; a {@code '\r'} right before it is dropped; a {@code '\r'}
 * anywhere else is a progress-bar redraw, so only the part after the last one is kept (what a
 * terminal would show). The kept part is bounded by {@code max} bytes: beyond that bytes are
 * dropped and the line is reported as cut, so a trainer that never prints a newline cannot make the
 * supervisor buffer without limit. A cut line is shortened to a UTF-8 character boundary. The result
 * never depends on how the stream was chunked (a property test checks that).
 *
 * <p>Not thread-safe: one splitter per stream, used by that stream's pump thread only.
 */
final class LineSplitter {
  /** Receives one line: {@code len} bytes from {@code buf[off]}, valid only during the call. */
  interface Sink {
    void line(byte[] buf, int off, int len, boolean cut);
  }

  private static final int INITIAL_CAPACITY = 8192;
  private static final int KEEP_CAPACITY = 64 * 1024;

  private final int max;
  private byte[] acc;
  private int accLen;
  private boolean accCut;
  /** A '\r' ended the last chunk: the next byte decides between CRLF and a redraw. */
  private boolean pendingCr;
  private long lines;
  private long oversized;

  LineSplitter(int max) {
    if (max < 1) {
      throw new IllegalArgumentException("max line length must be at least 1, was " + max);
    }
    this.max = max;
    this.acc = new byte[Math.min(max, INITIAL_CAPACITY)];
  }

  long lines() {
    return lines;
  }

  long oversized() {
    return oversized;
  }

  void feed(byte[] b, int off, int len, Sink sink) {
    final int end = off + len;
    int i = off;
    if (pendingCr && i < end) {
      pendingCr = false;
      if (b[i] == '\n') {
        emitAcc(sink);
        i++;
      } else {
        clearAcc();
      }
    }
    int segStart = i;
    while (i < end) {
      i = nextBreak(b, i, end);
      if (i == end) {
        append(b, segStart, end - segStart);
        return;
      }
      if (b[i] == '\n') {
        emit(b, segStart, i - segStart, sink);
        segStart = ++i;
      } else if (i + 1 < end) {
        if (b[i + 1] == '\n') {
          emit(b, segStart, i - segStart, sink);
          i += 2;
        } else {
          clearAcc(); // redraw: what came before the '\r' is overwritten on a terminal
          i++;
        }
        segStart = i;
      } else {
        append(b, segStart, i - segStart);
        pendingCr = true;
        return;
      }
    }
  }

  private static final VarHandle LONGS =
      MethodHandles.byteArrayViewVarHandle(long[].class, ByteOrder.LITTLE_ENDIAN);
  private static final long ONES = 0x0101010101010101L;
  private static final long HIGHS = 0x8080808080808080L;
  private static final long NLS = 0x0A0A0A0A0A0A0A0AL;
  private static final long CRS = 0x0D0D0D0D0D0D0D0DL;

  /**
   * The index of the first {@code '\n'} or {@code '\r'} in {@code b[i, end)}, or {@code end}.
   * Eight bytes per step: a byte equal to the wanted one is a zero byte of {@code word ^ wanted},
   * and {@code (x - 0x01..) & ~x & 0x80..} flags zero bytes; flags above a true zero byte can be
   * false (a borrow), but the lowest one never is, and on a little-endian read the lowest flag
   * is the first byte in the array (Anderson, "Bit Twiddling Hacks", "Determine if a word has a
   * zero byte").
   */
  static int nextBreak(byte[] b, int i, int end) {
    for (; i + 8 <= end; i += 8) {
      long w = (long) LONGS.get(b, i);
      long x = w ^ NLS;
      long y = w ^ CRS;
      long t = (((x - ONES) & ~x) | ((y - ONES) & ~y)) & HIGHS;
      if (t != 0) {
        return i + (Long.numberOfTrailingZeros(t) >>> 3);
      }
    }
    for (; i < end; i++) {
      byte c = b[i];
      if (c == '\n' || c == '\r') {
        return i;
      }
    }
    return end;
  }

  /** End of stream: a last line without a final newline is still a line. */
  void finish(Sink sink) {
    if (accLen > 0 || accCut || pendingCr) {
      pendingCr = false;
      emitAcc(sink);
    }
  }

  private void emit(byte[] b, int off, int len, Sink sink) {
    if (accLen == 0 && !accCut) {
      // Fast path: the whole line lies in this chunk, no copy.
      boolean cut = len > max;
      deliver(sink, b, off, cut ? utf8SafeLength(b, off, max) : len, cut);
    } else {
      append(b, off, len);
      emitAcc(sink);
    }
  }

  private void emitAcc(Sink sink) {
    deliver(sink, acc, 0, accCut ? utf8SafeLength(acc, 0, accLen) : accLen, accCut);
    clearAcc();
  }

  private void deliver(Sink sink, byte[] b, int off, int len, boolean cut) {
    lines++;
    if (cut) {
      oversized++;
    }
    sink.line(b, off, len, cut);
  }

  private void append(byte[] b, int off, int len) {
    if (len == 0) {
      return;
    }
    int room = max - accLen;
    int take = Math.min(len, room);
    if (take < len) {
      accCut = true;
    }
    if (take == 0) {
      return;
    }
    if (accLen + take > acc.length) {
      acc = java.util.Arrays.copyOf(acc, Math.min(max, Math.max(acc.length * 2, accLen + take)));
    }
    System.arraycopy(b, off, acc, accLen, take);
    accLen += take;
  }

  private void clearAcc() {
    accLen = 0;
    accCut = false;
    if (acc.length > KEEP_CAPACITY) {
      acc = new byte[INITIAL_CAPACITY]; // do not pin a giant line's buffer for the rest of the run
    }
  }

  /** Length of {@code b[off, off+len)} without a UTF-8 sequence the cut left incomplete. */
  static int utf8SafeLength(byte[] b, int off, int len) {
    for (int k = 1; k <= Math.min(4, len); k++) {
      int c = b[off + len - k] & 0xFF;
      if ((c & 0xC0) != 0x80) {
        // Only C2..F4 start a sequence; anything else is one malformed byte, kept as it is.
        int need = c < 0xC2 || c > 0xF4 ? 1 : c < 0xE0 ? 2 : c < 0xF0 ? 3 : 4;
        return need > k ? len - k : len;
      }
    }
    return len;
  }
}
