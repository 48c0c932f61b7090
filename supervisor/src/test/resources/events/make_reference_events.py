#!/usr/bin/python3
"""Writes the reference event file of EventRecordsTest with general-purpose libraries only.

No summary writer installs here from the package registries (PyTorch's needs a package that is
not on Debian), so the file is written from the published layouts with two independent
libraries instead of our own code:
  - the messages by Google's protocol-buffer runtime (Debian: python3-protobuf), from a
    descriptor built here with the field numbers of TensorFlow's published event.proto,
    summary.proto, tensor.proto and tensor_shape.proto;
  - the TFRecord framing (length, masked CRC-32C of the length, data, masked CRC-32C of the
    data) with the CRC-32C of crcmod (Debian: python3-crcmod), whose check value for
    "123456789" is asserted to be 0xE3069283 (RFC 3720, B.4).

The run is invented (a scenario of our own): 250 training steps of a loss written as
simple_value, a validation loss every 5 steps written as a one-element float tensor
(tensor_content), a learning rate written as a one-element double tensor (double_val), and
entries that are not scalars (a histogram, a three-element tensor, a string tensor) that a
reader must pass over.

    /usr/bin/python3 make_reference_events.py OUT_FILE

Next to OUT_FILE it writes OUT_FILE.expected.tsv: step, tag and each scalar's value as the
written bits hold it (a float32 widened to a double), one line per scalar, in file order.
"""
import math
import struct
import sys

import crcmod.predefined
from google.protobuf import descriptor_pb2, descriptor_pool, message_factory

crc32c = crcmod.predefined.mkCrcFun("crc-32c")
assert crc32c(b"123456789") == 0xE3069283  # RFC 3720, B.4


def masked(data):
    c = crc32c(data)
    return (((c >> 15) | (c << 17)) + 0xA282EAD8) & 0xFFFFFFFF


F = descriptor_pb2.FieldDescriptorProto
fd = descriptor_pb2.FileDescriptorProto(name="reference_events.proto", package="ref",
                                        syntax="proto3")


def message(name, fields):
    m = fd.message_type.add(name=name)
    for fname, number, ftype, label, type_name, packed in fields:
        f = m.field.add(name=fname, number=number, type=ftype, label=label)
        if type_name:
            f.type_name = type_name
        if packed:
            f.options.packed = True
    return m


OPT, REP = F.LABEL_OPTIONAL, F.LABEL_REPEATED
message("Dim", [("size", 1, F.TYPE_INT64, OPT, None, False)])
message("TensorShapeProto", [("dim", 2, F.TYPE_MESSAGE, REP, ".ref.Dim", False)])
message("TensorProto", [
    ("dtype", 1, F.TYPE_INT32, OPT, None, False),  # an enum on the wire: a varint
    ("tensor_shape", 2, F.TYPE_MESSAGE, OPT, ".ref.TensorShapeProto", False),
    ("tensor_content", 4, F.TYPE_BYTES, OPT, None, False),
    ("float_val", 5, F.TYPE_FLOAT, REP, None, True),
    ("double_val", 6, F.TYPE_DOUBLE, REP, None, True),
    ("string_val", 8, F.TYPE_BYTES, REP, None, False)])
message("HistogramProto", [("min", 1, F.TYPE_DOUBLE, OPT, None, False),
                           ("max", 2, F.TYPE_DOUBLE, OPT, None, False)])
message("Value", [
    ("tag", 1, F.TYPE_STRING, OPT, None, False),
    ("simple_value", 2, F.TYPE_FLOAT, OPT, None, False),
    ("histo", 5, F.TYPE_MESSAGE, OPT, ".ref.HistogramProto", False),
    ("tensor", 8, F.TYPE_MESSAGE, OPT, ".ref.TensorProto", False)])
message("Summary", [("value", 1, F.TYPE_MESSAGE, REP, ".ref.Value", False)])
message("Event", [
    ("wall_time", 1, F.TYPE_DOUBLE, OPT, None, False),
    ("step", 2, F.TYPE_INT64, OPT, None, False),
    ("file_version", 3, F.TYPE_STRING, OPT, None, False),
    ("summary", 5, F.TYPE_MESSAGE, OPT, ".ref.Summary", False)])
pool = descriptor_pool.DescriptorPool()
pool.Add(fd)


def cls(name):
    d = pool.FindMessageTypeByName("ref." + name)
    get = getattr(message_factory, "GetMessageClass", None)
    return get(d) if get else message_factory.MessageFactory(pool).GetPrototype(d)


Event = cls("Event")
DT_FLOAT, DT_DOUBLE, DT_STRING = 1, 2, 7


def record(out, event):
    data = event.SerializeToString()
    header = struct.pack("<Q", len(data))
    out.write(header + struct.pack("<I", masked(header)) + data + struct.pack("<I", masked(data)))


def f32(x):
    return struct.unpack("<f", struct.pack("<f", x))[0]


def main(path):
    t0 = 1_790_000_000.0
    expected = []
    with open(path, "wb") as out:
        record(out, Event(wall_time=t0, file_version="brain.Event:2"))
        for step in range(1, 251):
            e = Event(wall_time=t0 + step, step=step)
            v = e.summary.value.add(tag="loss")
            v.simple_value = 2.3 * math.exp(-step / 80.0) + 0.1 + 0.01 * math.sin(step)
            expected.append((step, "loss", f32(v.simple_value)))
            record(out, e)
            if step % 5 == 0:
                e = Event(wall_time=t0 + step + 0.5, step=step)
                v = e.summary.value.add(tag="val_loss")
                v.tensor.dtype = DT_FLOAT
                v.tensor.tensor_content = struct.pack("<f", 2.3 * math.exp(-step / 90.0) + 0.2)
                expected.append((step, "val_loss", struct.unpack("<f", v.tensor.tensor_content)[0]))
                lr = e.summary.value.add(tag="lr")
                lr.tensor.dtype = DT_DOUBLE
                lr.tensor.double_val.append(0.1 if step <= 150 else 0.05)
                expected.append((step, "lr", lr.tensor.double_val[0]))
                h = e.summary.value.add(tag="weights")  # not a scalar
                h.histo.min = -1.0
                h.histo.max = 1.0
                three = e.summary.value.add(tag="three")  # three elements: not a scalar
                three.tensor.dtype = DT_FLOAT
                three.tensor.tensor_shape.dim.add(size=3)
                three.tensor.float_val.extend([1.0, 2.0, 3.0])
                note = e.summary.value.add(tag="note")  # a string: not a scalar
                note.tensor.dtype = DT_STRING
                note.tensor.string_val.append(b"epoch done")
                record(out, e)
    with open(path + ".expected.tsv", "w") as out:
        for step, tag, value in expected:
            out.write("%d\t%s\t%r\n" % (step, tag, value))


if __name__ == "__main__":
    main(sys.argv[1])
