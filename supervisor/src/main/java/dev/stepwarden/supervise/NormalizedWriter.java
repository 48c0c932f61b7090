package dev.stepwarden.supervise;

import dev.stepwarden.metrics.Sample;
import java.io.Closeable;
import java.io.IOException;
import java.io.OutputStream;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.nio.file.StandardOpenOption;
import java.util.HashMap;
import java.util.Map;

/**
 * Writes the run's normalized metrics file ({@code metrics.jsonl}): one JSON object per sample,
 * {@code {"step":..,"epoch":..,"t":..,"lr":..,"<series>":..}}, non-finite values as the strings
 * {@code "nan"}, {@code "inf"}, {@code "-inf"}.
 *
 * <p>Design: a flood of metric lines writes one normalized line each, so this goes straight to
 * bytes in one reused buffer: series keys are encoded once, the rate's and the epoch's text are
 * kept while they stay the same, and a value the trainer printed as a valid JSON number is copied as printed
 * (it parses back to the very same double) instead of being formatted again. The buffer goes to
 * the file when it fills, on {@link #flush()} and on {@link #close()}. Not thread-safe: the
 * supervisor calls it under its lock.
 */
final class NormalizedWriter implements Closeable {
  private static final int FLUSH_AT = 192 * 1024;
  private static final byte[] STEP = ascii("{\"step\":");
  private static final byte[] EPOCH = ascii(",\"epoch\":");
  private static final byte[] TIME = ascii(",\"t\":");
  private static final byte[] RATE = ascii(",\"lr\":");

  private final OutputStream out;
  private byte[] buf = new byte[256 * 1024];
  private int len;
  /** Series name to its encoded {@code ,"name":}; a handful of names per run. */
  private final Map<String, byte[]> keys = new HashMap<>();
  private long rateBits;
  private byte[] rateText;
  private long epochBits;
  private byte[] epochText;
  private long timeMillis;
  private byte[] timeText;
  /** The last step written and its digits: steps mostly count up by one. */
  private long lastStep = -1;
  private final byte[] stepDigits = new byte[20];
  private int stepFrom = stepDigits.length;
  /** Recent series names and their keys, matched by identity (the intake reuses its names). */
  private final String[] recentNames = new String[8];
  private final byte[][] recentKeys = new byte[8][];
  private int recentNext;

  private NormalizedWriter(OutputStream out) {
    this.out = out;
  }

  /** Opens {@code file} for appending (it exists: the run directory made it private). */
  static NormalizedWriter append(Path file) throws IOException {
    return new NormalizedWriter(Files.newOutputStream(file, StandardOpenOption.APPEND));
  }

  /**
   * The text a line printed for each of its series, as handed over by the sample path (the
   * writer reads it; it never reaches back into the intake that parsed the line).
   */
  interface Printed {
    /** The printed length of {@code series}' number when it was valid JSON, else -1. */
    int length(String series);

    /** Copies that text into {@code out} at {@code at}. */
    void copy(String series, byte[] out, int at);
  }

  /**
   * Appends {@code s} at learning rate {@code rate}; numbers {@code printed} holds (those the
   * line printed as valid JSON) are copied as printed; {@code printed} may be null.
   */
  void write(Sample s, double rate, Printed printed) throws IOException {
    put(STEP);
    putStep(s.step());
    double epoch = s.epoch();
    if (!Double.isNaN(epoch)) {
      put(EPOCH);
      long eb = Double.doubleToRawLongBits(epoch);
      if (epochText == null || eb != epochBits) { // an epoch lasts thousands of lines
        epochBits = eb;
        int from = len;
        putDouble(epoch);
        epochText = java.util.Arrays.copyOfRange(buf, from, len);
      } else {
        put(epochText);
      }
    }
    put(TIME);
    long t = s.wallMillis();
    if (timeText == null || t != timeMillis) { // a flood shares each millisecond among thousands
      timeMillis = t;
      timeText = ascii(Long.toString(t));
    }
    put(timeText);
    put(RATE);
    long bits = Double.doubleToRawLongBits(rate);
    if (rateText == null || bits != rateBits) {
      rateBits = bits;
      rateText = ascii(Double.toString(rate));
    }
    put(rateText);
    for (int i = 0, n = s.size(); i < n; i++) {
      String name = s.name(i);
      put(keyOf(name));
      double v = s.valueAt(i);
      if (!Double.isFinite(v)) {
        put(Double.isNaN(v) ? NAN : v > 0 ? INF : NEG_INF);
        continue;
      }
      int printedLen = printed == null ? -1 : printed.length(name);
      if (printedLen >= 0) {
        ensure(printedLen);
        printed.copy(name, buf, len);
        len += printedLen;
      } else {
        putDouble(v);
      }
    }
    ensure(2);
    buf[len++] = '}';
    buf[len++] = '\n';
    if (len >= FLUSH_AT) {
      drain();
      if (buf.length > 1024 * 1024) {
        buf = new byte[256 * 1024]; // do not keep a giant line's buffer for the rest of the run
      }
    }
  }

  private static final byte[] NAN = ascii("\"nan\"");
  private static final byte[] INF = ascii("\"inf\"");
  private static final byte[] NEG_INF = ascii("\"-inf\"");

  private byte[] keyOf(String name) {
    for (int i = 0; i < recentNames.length; i++) {
      if (recentNames[i] == name) {
        return recentKeys[i];
      }
    }
    byte[] key = keys.computeIfAbsent(name, NormalizedWriter::key);
    recentNames[recentNext] = name;
    recentKeys[recentNext] = key;
    recentNext = (recentNext + 1) & 7;
    return key;
  }

  /** Writes a step; the next one after the last is made by adding one to its digits. */
  private void putStep(long step) {
    if (step >= 0 && step == lastStep + 1 && lastStep >= 0) {
      int k = stepDigits.length - 1;
      while (k >= stepFrom && stepDigits[k] == '9') {
        stepDigits[k--] = '0';
      }
      if (k >= stepFrom) {
        stepDigits[k]++;
      } else {
        stepDigits[--stepFrom] = '1'; // 999 + 1: one digit more
      }
    } else if (step >= 0) {
      String t = Long.toString(step);
      stepFrom = stepDigits.length - t.length();
      for (int k = 0; k < t.length(); k++) {
        stepDigits[stepFrom + k] = (byte) t.charAt(k);
      }
    } else {
      lastStep = -1;
      putLong(step);
      return;
    }
    lastStep = step;
    int n = stepDigits.length - stepFrom;
    ensure(n);
    System.arraycopy(stepDigits, stepFrom, buf, len, n);
    len += n;
  }

  /** Double.toString's text, without its cost for whole numbers below 10^7 (epochs). */
  private void putDouble(double v) {
    long l = (long) v;
    if (l == v && Math.abs(l) < 10_000_000L && (l != 0 || 1 / v > 0)) {
      putLong(l);
      ensure(2);
      buf[len++] = '.';
      buf[len++] = '0';
    } else {
      put(ascii(Double.toString(v)));
    }
  }

  private void putLong(long v) {
    ensure(20);
    if (v < 0) {
      if (v == Long.MIN_VALUE) {
        put(ascii(Long.toString(v)));
        return;
      }
      buf[len++] = '-';
      v = -v;
    }
    if (v < 100_000_000L) {
      putBelow1e8((int) v);
      return;
    }
    // Two divisions by 10^8 at most, then int arithmetic: long divisions are the slow part.
    long high = v / 100_000_000L;
    int low = (int) (v - high * 100_000_000L);
    if (high < 100_000_000L) {
      putBelow1e8((int) high);
    } else {
      long top = high / 100_000_000L;
      putBelow1e8((int) top);
      putEight((int) (high - top * 100_000_000L));
    }
    putEight(low);
  }

  /** {@code v} (0 to 10^8 - 1) without leading zeros. */
  private void putBelow1e8(int v) {
    int digits = 1;
    for (int p = 10; digits < 8 && v >= p; p *= 10) {
      digits++;
    }
    for (int k = len + digits - 1; k >= len; k--) {
      buf[k] = (byte) ('0' + v % 10);
      v /= 10;
    }
    len += digits;
  }

  /** {@code v} (0 to 10^8 - 1) as exactly eight digits. */
  private void putEight(int v) {
    for (int k = len + 7; k >= len; k--) {
      buf[k] = (byte) ('0' + v % 10);
      v /= 10;
    }
    len += 8;
  }

  private void put(byte[] b) {
    ensure(b.length);
    System.arraycopy(b, 0, buf, len, b.length);
    len += b.length;
  }

  private void ensure(int more) {
    if (len + more > buf.length) {
      buf = java.util.Arrays.copyOf(buf, Math.max(buf.length * 2, len + more));
    }
  }

  private void drain() throws IOException {
    if (len > 0) {
      int n = len;
      len = 0; // a failed write is not retried: the next sample starts a fresh line
      out.write(buf, 0, n);
    }
  }

  void flush() throws IOException {
    drain();
    out.flush();
  }

  @Override
  public void close() throws IOException {
    try {
      drain();
    } finally {
      out.close();
    }
  }

  /** {@code ,"name":} with the name escaped as a JSON string. */
  private static byte[] key(String name) {
    StringBuilder b = new StringBuilder(name.length() + 4).append(",\"");
    for (int i = 0; i < name.length(); i++) {
      char c = name.charAt(i);
      if (c == '"' || c == '\\') {
        b.append('\\').append(c);
      } else if (c < 0x20) {
        b.append(String.format(java.util.Locale.ROOT, "\\u%04x", (int) c));
      } else {
        b.append(c);
      }
    }
    return b.append("\":").toString().getBytes(StandardCharsets.UTF_8);
  }

  private static byte[] ascii(String s) {
    return s.getBytes(StandardCharsets.US_ASCII);
  }
}
