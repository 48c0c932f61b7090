package dev.stepwarden.metrics;

import java.util.function.Consumer;
import java.util.zip.CRC32C;

/**
 * Reads event files ({@code events.out.tfevents.*}): TFRecord framing around {@code Event}
 * protocol buffers whose summaries hold scalar values, turned into JSON lines for the intake.
 *
 * <p>Framing (TFRecord): each record is a little-endian uint64 length, the masked CRC-32C of
 * those 8 bytes (uint32), the data, and the masked CRC-32C of the data (uint32). A CRC is masked
 * as {@code ((crc >>> 15) | (crc << 17)) + 0xa282ead8}. CRC-32C is the Castagnoli polynomial of
 * RFC 3720 (iSCSI), s. 12.1 and B.4, the JDK's {@link CRC32C}. A record whose bytes have not all
 * arrived is left for the next read (the writer is still writing it); a record whose length CRC
 * is wrong makes the reader look for the next byte offset where a valid length header starts; a
 * record whose data CRC is wrong is passed over. Both are counted.
 *
 * <p>Content ({@code event.proto}, {@code summary.proto}, {@code tensor.proto} of the published
 * TensorFlow sources): {@code Event} has {@code step} (field 2, int64) and {@code summary}
 * (field 5); a {@code Summary} repeats {@code value} (field 1), each with {@code tag} (1) and
 * either {@code simple_value} (2, float) or {@code tensor} (8). A tensor is read when it holds
 * exactly one element of type float (dtype 1) or double (dtype 2), from {@code float_val} (5),
 * {@code double_val} (6) or {@code tensor_content} (4). Each event with at least one such scalar
 * becomes one JSON line: the step under the plan's step key, each tag as a key. A float32 value
 * is written as the shortest decimal that names it, as a reader of the writer's numbers would
 * see it. Everything else (graphs, histograms, images, the file-version record) is passed over.
 * Not thread-safe.
 */
final class EventRecords {
  private static final int HEADER = 12;
  private static final int MASK_DELTA = 0xa282ead8;
  /** Longest record read (a scalar event is well under 1 KiB); a longer one is passed over. */
  static final long MAX_RECORD = 64L << 20;

  private final String stepKey;
  private final CRC32C crc = new CRC32C();
  private final StringBuilder json = new StringBuilder(128);
  private long records;
  private long corrupt;
  private long scalars;
  /** Bytes of a too-long record still to pass over. */
  private long skipping;

  EventRecords(String stepKey) {
    this.stepKey = stepKey;
  }

  /** The masked CRC-32C of {@code b[off, off+len)}. */
  static int maskedCrc(byte[] b, int off, int len) {
    CRC32C c = new CRC32C();
    c.update(b, off, len);
    return mask((int) c.getValue());
  }

  static int mask(int crc) {
    return ((crc >>> 15) | (crc << 17)) + MASK_DELTA;
  }

  /**
   * Reads the complete records of {@code b[off, off+len)} and hands each event's JSON line to
   * {@code lines}; returns how many bytes were consumed (the rest, a record not yet whole, is to
   * be offered again with what follows it).
   */
  int read(byte[] b, int off, int len, Consumer<String> lines) {
    int p = off;
    int end = off + len;
    if (skipping > 0) {
      int n = (int) Math.min(skipping, len);
      skipping -= n;
      p += n;
    }
    while (end - p >= HEADER) {
      long length = le64(b, p);
      if (crc(b, p, 8) != le32(b, p + 8)) {
        corrupt++;
        p = resync(b, p + 1, end);
        continue;
      }
      if (length < 0 || length > MAX_RECORD) {
        corrupt++;
        long whole = HEADER + length + 4;
        if (length < 0 || whole < 0) {
          p = resync(b, p + 1, end);
          continue;
        }
        long available = end - p;
        if (whole <= available) {
          p += (int) whole;
        } else {
          skipping = whole - available;
          p = end;
        }
        continue;
      }
      int n = (int) length;
      if (end - p < HEADER + n + 4) {
        break; // torn: the rest of the record is still being written
      }
      int data = p + HEADER;
      p = data + n + 4;
      if (crc(b, data, n) != le32(b, data + n)) {
        corrupt++;
        continue;
      }
      records++;
      String line = event(b, data, data + n);
      if (line != null) {
        lines.accept(line);
      }
    }
    return p - off;
  }

  /** The first offset from {@code from} where a valid length header starts, else where the
   * last bytes that could still begin one start. */
  private int resync(byte[] b, int from, int end) {
    for (int q = from; end - q >= HEADER; q++) {
      if (crc(b, q, 8) == le32(b, q + 8)) {
        return q;
      }
    }
    return Math.max(from, end - HEADER + 1);
  }

  private int crc(byte[] b, int off, int len) {
    crc.reset();
    crc.update(b, off, len);
    return mask((int) crc.getValue());
  }

  long records() {
    return records;
  }

  long corruptRecords() {
    return corrupt;
  }

  long scalars() {
    return scalars;
  }

  /** One Event message as a JSON line, or null when it holds no scalar. */
  private String event(byte[] b, int from, int to) {
    long step = Long.MIN_VALUE;
    json.setLength(0);
    int fields = 0;
    Wire w = new Wire(b, from, to);
    while (w.more()) {
      int tag = w.tag();
      if (tag == (2 << 3)) {
        step = w.varint();
      } else if (tag == ((5 << 3) | 2)) {
        fields += summary(w.sub());
      } else if (!w.skip(tag)) {
        return null;
      }
    }
    if (fields == 0) {
      return null;
    }
    StringBuilder line = new StringBuilder(json.length() + 32).append('{');
    if (step != Long.MIN_VALUE) {
      string(line, stepKey).append(':').append(step).append(',');
    }
    line.append(json, 1, json.length()).append('}');
    return line.toString();
  }

  /** Appends {@code ,"tag":value} to {@code json} per scalar of a Summary; returns the count. */
  private int summary(Wire w) {
    int n = 0;
    while (w != null && w.more()) {
      int tag = w.tag();
      if (tag == ((1 << 3) | 2)) {
        n += value(w.sub());
      } else if (!w.skip(tag)) {
        break;
      }
    }
    return n;
  }

  private int value(Wire w) {
    if (w == null) {
      return 0;
    }
    String tagName = null;
    double v = Double.NaN;
    boolean single = false;
    boolean found = false;
    while (w.more()) {
      int tag = w.tag();
      if (tag == ((1 << 3) | 2)) {
        tagName = w.text();
      } else if (tag == ((2 << 3) | 5)) {
        float f = Float.intBitsToFloat(w.fixed32());
        v = f;
        single = true;
        found = true;
      } else if (tag == ((8 << 3) | 2)) {
        Wire t = w.sub();
        double[] one = t == null ? null : tensor(t);
        if (one != null) {
          v = one[0];
          single = one[1] != 0;
          found = true;
        }
      } else if (!w.skip(tag)) {
        return 0;
      }
    }
    if (!found || tagName == null || tagName.isEmpty()) {
      return 0;
    }
    json.append(',');
    string(json, tagName).append(':');
    json.append(single ? Float.toString((float) v) : Double.toString(v));
    scalars++;
    return 1;
  }

  /**
   * A one-element float or double tensor: {value, 1 if float32 else 0}; null for any other.
   */
  private static double[] tensor(Wire w) {
    int dtype = 0;
    long elements = 1;
    double value = Double.NaN;
    int values = 0;
    int rawLen = -1;
    while (w.more()) {
      int tag = w.tag();
      switch (tag) {
        case (1 << 3) -> dtype = (int) w.varint();
        case (2 << 3) | 2 -> {
          Wire shape = w.sub();
          if (shape == null) {
            return null;
          }
          elements = elements(shape);
        }
        case (4 << 3) | 2 -> {
          Wire raw = w.sub();
          if (raw == null) {
            return null;
          }
          int len = raw.to - raw.pos;
          rawLen = len;
          if (len == 4) {
            value = Float.intBitsToFloat(le32(raw.b, raw.pos));
            values += 1;
          } else if (len == 8) {
            value = Double.longBitsToDouble(le64(raw.b, raw.pos));
            values += 1;
          } else {
            values += 2;
          }
        }
        case (5 << 3) | 5 -> {
          value = Float.intBitsToFloat(w.fixed32());
          values++;
        }
        case (5 << 3) | 2 -> {
          Wire packed = w.sub();
          if (packed == null || (packed.to - packed.pos) % 4 != 0) {
            return null;
          }
          values += (packed.to - packed.pos) / 4;
          if (packed.to - packed.pos >= 4) {
            value = Float.intBitsToFloat(le32(packed.b, packed.pos));
          }
        }
        case (6 << 3) | 1 -> {
          value = Double.longBitsToDouble(w.fixed64());
          values++;
        }
        case (6 << 3) | 2 -> {
          Wire packed = w.sub();
          if (packed == null || (packed.to - packed.pos) % 8 != 0) {
            return null;
          }
          values += (packed.to - packed.pos) / 8;
          if (packed.to - packed.pos >= 8) {
            value = Double.longBitsToDouble(le64(packed.b, packed.pos));
          }
        }
        default -> {
          if (!w.skip(tag)) {
            return null;
          }
        }
      }
    }
    boolean float32 = dtype == 1;
    if ((!float32 && dtype != 2) || elements != 1 || values != 1
        || (rawLen == 4 && !float32) || (rawLen == 8 && float32)) {
      return null;
    }
    return new double[] {value, float32 ? 1 : 0};
  }

  /** The element count of a TensorShapeProto (dim = 2, each with size = 1); -1 if unknown. */
  private static long elements(Wire shape) {
    long n = 1;
    while (shape.more()) {
      int tag = shape.tag();
      if (tag == ((2 << 3) | 2)) {
        Wire dim = shape.sub();
        if (dim == null) {
          return -1;
        }
        long size = -1;
        while (dim.more()) {
          int t = dim.tag();
          if (t == (1 << 3)) {
            size = dim.varint();
          } else if (!dim.skip(t)) {
            return -1;
          }
        }
        if (size < 0) {
          return -1;
        }
        n *= size;
      } else if (tag == (3 << 3)) {
        if (shape.varint() != 0) {
          return -1; // unknown rank
        }
      } else if (!shape.skip(tag)) {
        return -1;
      }
    }
    return n;
  }

  private static StringBuilder string(StringBuilder b, String s) {
    b.append('"');
    for (int i = 0; i < s.length(); i++) {
      char c = s.charAt(i);
      if (c == '"' || c == '\\') {
        b.append('\\').append(c);
      } else if (c < 0x20) {
        b.append(String.format("\\u%04x", (int) c));
      } else {
        b.append(c);
      }
    }
    return b.append('"');
  }

  static long le64(byte[] b, int at) {
    return (le32(b, at) & 0xffff_ffffL) | ((long) le32(b, at + 4) << 32);
  }

  static int le32(byte[] b, int at) {
    return (b[at] & 0xff) | (b[at + 1] & 0xff) << 8 | (b[at + 2] & 0xff) << 16
        | (b[at + 3] & 0xff) << 24;
  }

  /** A protocol-buffer reader over {@code b[pos, to)}; a malformed field ends it. */
  private static final class Wire {
    final byte[] b;
    int pos;
    final int to;
    boolean broken;

    Wire(byte[] b, int from, int to) {
      this.b = b;
      this.pos = from;
      this.to = to;
    }

    boolean more() {
      return !broken && pos < to;
    }

    int tag() {
      long t = varint();
      return t > Integer.MAX_VALUE || t < 0 ? -1 : (int) t;
    }

    long varint() {
      long v = 0;
      for (int shift = 0; shift < 64; shift += 7) {
        if (pos >= to) {
          broken = true;
          return 0;
        }
        byte x = b[pos++];
        v |= (long) (x & 0x7f) << shift;
        if (x >= 0) {
          return v;
        }
      }
      broken = true;
      return 0;
    }

    int fixed32() {
      if (to - pos < 4) {
        broken = true;
        return 0;
      }
      int v = le32(b, pos);
      pos += 4;
      return v;
    }

    long fixed64() {
      if (to - pos < 8) {
        broken = true;
        return 0;
      }
      long v = le64(b, pos);
      pos += 8;
      return v;
    }

    /** A length-delimited field's bytes as a reader of their own, or null when malformed. */
    Wire sub() {
      long n = varint();
      if (broken || n < 0 || n > to - pos) {
        broken = true;
        return null;
      }
      Wire w = new Wire(b, pos, pos + (int) n);
      pos += (int) n;
      return w;
    }

    String text() {
      Wire s = sub();
      return s == null ? null
          : new String(b, s.pos, s.to - s.pos, java.nio.charset.StandardCharsets.UTF_8);
    }

    /** Passes over a field of {@code tag}'s wire type; false for a type we cannot pass over. */
    boolean skip(int tag) {
      switch (tag & 7) {
        case 0 -> varint();
        case 1 -> fixed64();
        case 2 -> sub();
        case 5 -> fixed32();
        default -> broken = true;
      }
      return !broken && tag > 0;
    }
  }
}
