#!/usr/bin/python3
"""Exits 0 when two spar archives hold the same records, bit for bit, apart from the records
that name a run or time it (run.id, elapsed_ms) or those given with --ignore; prints the
first difference and exits 1 otherwise. The archive layout is read from docs/file-formats.md
("Archive (.spar files)"), independently of spar's own reader.

Usage: same_records.py A.spar B.spar [--ignore NAME ...]
"""
import struct
import sys


def records(path):
    data = open(path, "rb").read()
    if data[:8] != b"SPARARCH":
        sys.exit(f"{path}: not a spar archive")
    version, flags, count = struct.unpack_from("<IIQ", data, 8)
    at, out = 24, {}
    for _ in range(count):
        kind = data[at]
        (name_bytes,) = struct.unpack_from("<H", data, at + 1)
        name = data[at + 3 : at + 3 + name_bytes].decode("utf-8")
        at += 3 + name_bytes
        shape = ()
        if kind in (1, 2):  # float32 or float64 tensor: rank, then the extents
            rank = data[at]
            shape = struct.unpack_from("<%dQ" % rank, data, at + 1)
            at += 1 + 8 * rank
        (payload_bytes,) = struct.unpack_from("<Q", data, at)
        at += 8
        out[name] = (kind, shape, data[at : at + payload_bytes])
        at += payload_bytes + 4  # and the CRC-32
    return out


def main():
    args = sys.argv[1:]
    ignored = {"run.id", "elapsed_ms"}
    if "--ignore" in args:
        ignored |= set(args[args.index("--ignore") + 1 :])
        args = args[: args.index("--ignore")]
    a, b = (records(p) for p in args[:2])
    for name in sorted(set(a) | set(b)):
        if name in ignored:
            continue
        if name not in a or name not in b:
            print(f"record {name} is only in {args[0] if name in a else args[1]}")
            return 1
        if a[name] != b[name]:
            print(f"record {name} differs between {args[0]} and {args[1]}")
            return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
