#!/usr/bin/env python3
"""Checks that a PNG screenshot is not blank, using only the Python standard library.

Decodes the PNG (zlib + the five scanline filters of the PNG specification, W3C PNG 2nd ed. sec. 9)
and prints width, height, the number of distinct pixel values and the share of non-background
pixels. Exit status 1 when the image looks blank (fewer than MIN_COLOURS distinct values or less
than MIN_INK of the pixels differ from the most common value).
"""
import struct
import sys
import zlib
from collections import Counter

MIN_COLOURS = 16
MIN_INK = 0.01


def decode(path):
    data = open(path, "rb").read()
    if data[:8] != b"\x89PNG\r\n\x1a\n":
        raise ValueError("not a PNG file")
    pos, idat, header = 8, b"", None
    while pos < len(data):
        length, kind = struct.unpack(">I4s", data[pos : pos + 8])
        body = data[pos + 8 : pos + 8 + length]
        if kind == b"IHDR":
            header = struct.unpack(">IIBBBBB", body)
        elif kind == b"IDAT":
            idat += body
        elif kind == b"IEND":
            break
        pos += 12 + length
    width, height, depth, colour_type, _, _, interlace = header
    if depth != 8 or interlace != 0 or colour_type not in (0, 2, 4, 6):
        raise ValueError(f"unsupported PNG layout {header}")
    bpp = {0: 1, 2: 3, 4: 2, 6: 4}[colour_type]
    raw = zlib.decompress(idat)
    stride = width * bpp
    prev = bytearray(stride)
    rows = []
    i = 0
    for _ in range(height):
        f = raw[i]
        line = bytearray(raw[i + 1 : i + 1 + stride])
        i += 1 + stride
        for x in range(stride):
            a = line[x - bpp] if x >= bpp else 0
            b = prev[x]
            c = prev[x - bpp] if x >= bpp else 0
            if f == 1:
                line[x] = (line[x] + a) & 255
            elif f == 2:
                line[x] = (line[x] + b) & 255
            elif f == 3:
                line[x] = (line[x] + (a + b) // 2) & 255
            elif f == 4:
                p = a + b - c
                pa, pb, pc = abs(p - a), abs(p - b), abs(p - c)
                pred = a if pa <= pb and pa <= pc else (b if pb <= pc else c)
                line[x] = (line[x] + pred) & 255
        rows.append(bytes(line))
        prev = line
    return width, height, bpp, rows


def main():
    width, height, bpp, rows = decode(sys.argv[1])
    counts = Counter()
    for row in rows:
        for x in range(0, len(row), bpp):
            counts[row[x : x + bpp]] += 1
    total = width * height
    background = counts.most_common(1)[0][1]
    ink = 1.0 - background / total
    print(f"{width}x{height} distinct={len(counts)} non_background={ink:.3f}")
    if len(counts) < MIN_COLOURS or ink < MIN_INK:
        print("screenshot looks blank", file=sys.stderr)
        sys.exit(1)


if __name__ == "__main__":
    main()
