#!/usr/bin/python3
"""Decodes the PNG files spar writes with a decoder written here from the PNG specification
and python's zlib, and compares the pixels with the bytes spar meant to write.

Usage: /usr/bin/python3 check_png.py PATH_TO_SPAR_PICTURE_DUMP

Source: Portable Network Graphics (PNG) Specification (Second Edition), W3C Recommendation
2003 (also ISO/IEC 15948): 5.2 signature, 5.3 chunk layout and CRC, 11.2.2 IHDR, 11.2.4 IDAT,
11.2.5 IEND, 9.2 filter types 0-4 and 9.4 the Paeth predictor (section numbers from memory). The zlib stream of the
concatenated IDAT data is inflated with python's zlib module; each chunk's CRC-32 is
recomputed with zlib.crc32 over the chunk type and data.

spar_picture_dump (tests/picture_dump.cpp) writes NAME.png and NAME.raw for a set of gray and
RGB pictures of odd sizes, once with the encoder choosing filters per row and once forced to
each filter type 0-4, and lists them on standard output.

Output: one line per picture, then "N passed, M failed". Exit status 0 when all pass, 1 when a
check fails, 2 for bad usage or when the dump program fails.
"""
import os
import struct
import subprocess
import sys
import tempfile
import zlib

SIGNATURE = bytes([137, 80, 78, 71, 13, 10, 26, 10])  # PNG spec 5.2
COLOUR_TYPES = {0: 1, 2: 3}  # PNG spec 11.2.1: greyscale, truecolour -> samples per pixel


class BadPng(Exception):
    pass


def chunks(data):
    """(type, payload) of every chunk, checking lengths and CRCs (PNG spec 5.3)."""
    if data[:8] != SIGNATURE:
        raise BadPng("signature %r is not the PNG signature" % data[:8])
    pos = 8
    out = []
    while pos < len(data):
        if pos + 12 > len(data):
            raise BadPng("truncated chunk header at byte %d" % pos)
        (length,) = struct.unpack(">I", data[pos:pos + 4])
        kind = data[pos + 4:pos + 8]
        payload = data[pos + 8:pos + 8 + length]
        if len(payload) != length or pos + 12 + length > len(data):
            raise BadPng("chunk %r runs past the end" % kind)
        (crc,) = struct.unpack(">I", data[pos + 8 + length:pos + 12 + length])
        if crc != zlib.crc32(kind + payload) & 0xFFFFFFFF:
            raise BadPng("chunk %r: CRC mismatch" % kind)
        out.append((kind, payload))
        pos += 12 + length
    return out


def paeth(a, b, c):
    """The Paeth predictor, PNG spec 9.4: a left, b above, c upper left."""
    p = a + b - c
    pa, pb, pc = abs(p - a), abs(p - b), abs(p - c)
    if pa <= pb and pa <= pc:
        return a
    if pb <= pc:
        return b
    return c


def decode(data):
    """(width, height, channels, pixel bytes, filter type of each row)."""
    parts = chunks(data)
    if not parts or parts[0][0] != b"IHDR":
        raise BadPng("the first chunk is not IHDR")
    if parts[-1] != (b"IEND", b""):
        raise BadPng("the last chunk is not an empty IEND")
    ihdr = parts[0][1]
    if len(ihdr) != 13:
        raise BadPng("IHDR holds %d bytes, not 13" % len(ihdr))
    width, height, depth, colour, compression, filtering, interlace = struct.unpack(">IIBBBBB", ihdr)
    if depth != 8 or colour not in COLOUR_TYPES or (compression, filtering, interlace) != (0, 0, 0):
        raise BadPng("IHDR: depth %d, colour type %d, methods %d/%d/%d (want 8, 0 or 2, 0/0/0)"
                     % (depth, colour, compression, filtering, interlace))
    if width == 0 or height == 0:
        raise BadPng("IHDR: zero width or height")
    channels = COLOUR_TYPES[colour]
    idat = b"".join(payload for kind, payload in parts if kind == b"IDAT")
    raw = zlib.decompress(idat)
    stride = width * channels
    if len(raw) != height * (1 + stride):
        raise BadPng("inflated %d bytes, expected %d" % (len(raw), height * (1 + stride)))
    bpp = channels  # bytes per complete pixel at 8 bits per sample (PNG spec 9.2)
    out = bytearray()
    previous = bytearray(stride)
    filters = []
    for y in range(height):
        row = raw[y * (1 + stride):(y + 1) * (1 + stride)]
        kind, line = row[0], bytearray(row[1:])
        filters.append(kind)
        for i in range(stride):
            a = line[i - bpp] if i >= bpp else 0
            b = previous[i]
            c = previous[i - bpp] if i >= bpp else 0
            if kind == 0:
                predicted = 0
            elif kind == 1:
                predicted = a
            elif kind == 2:
                predicted = b
            elif kind == 3:
                predicted = (a + b) // 2
            elif kind == 4:
                predicted = paeth(a, b, c)
            else:
                raise BadPng("row %d: filter type %d is not 0-4" % (y, kind))
            line[i] = (line[i] + predicted) & 0xFF
        out += line
        previous = line
    return width, height, channels, bytes(out), filters


def main():
    if len(sys.argv) != 2:
        print(__doc__.strip().splitlines()[2], file=sys.stderr)
        return 2
    passed = failed = 0
    seen_filters = set()
    with tempfile.TemporaryDirectory() as folder:
        run = subprocess.run([sys.argv[1], "png", folder], capture_output=True, text=True)
        if run.returncode != 0:
            print("dump failed: %s" % run.stderr.strip(), file=sys.stderr)
            return 2
        listed = [line.split() for line in run.stdout.splitlines()]
        leftovers = [f for f in os.listdir(folder) if ".tmp-" in f]
        if leftovers:
            print("FAIL temporary files left behind: %s" % leftovers)
            failed += 1
        for name, w, h, c, forced in listed:
            w, h, c, forced = int(w), int(h), int(c), int(forced)
            try:
                with open(os.path.join(folder, name + ".png"), "rb") as f:
                    width, height, channels, pixels, filters = decode(f.read())
                with open(os.path.join(folder, name + ".raw"), "rb") as f:
                    want = f.read()
                problems = []
                if (width, height, channels) != (w, h, c):
                    problems.append("IHDR says %dx%d with %d channels, the picture is %dx%d with %d"
                                    % (width, height, channels, w, h, c))
                if pixels != want:
                    diff = sum(1 for p, q in zip(pixels, want) if p != q) + abs(len(pixels) - len(want))
                    problems.append("%d of %d bytes differ" % (diff, len(want)))
                if forced >= 0 and set(filters) != {forced}:
                    problems.append("rows use filters %s, the encoder was told %d" % (sorted(set(filters)), forced))
                seen_filters.update(filters)
            except BadPng as e:
                problems = [str(e)]
            if problems:
                failed += 1
                print("FAIL %s: %s" % (name, "; ".join(problems)))
            else:
                passed += 1
                print("pass %s: %dx%d, %d channel(s), row filters %s" % (name, w, h, c, sorted(set(filters))))
    # The forced runs must have exercised the un-filtering of every type, or the pixel
    # comparison above proves less than it claims.
    if seen_filters != {0, 1, 2, 3, 4}:
        failed += 1
        print("FAIL filter types seen: %s, want all of 0-4" % sorted(seen_filters))
    if passed == 0:
        failed += 1
        print("FAIL no pictures were listed")
    print("%d passed, %d failed" % (passed, failed))
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
