#!/usr/bin/python3
"""tests/png_check.py: a rendered page is there and not blank (standard library only).

Usage: png_check.py FILE.png WIDTH HEIGHT
Decodes the PNG (zlib and the five PNG filters, by the PNG specification, ISO/IEC 15948),
checks its size, and requires that at least 2 % of the pixels differ from white and that
some are far from grey (a coloured curve). Exit 1 otherwise. Run by tests/browser.sh."""

import struct
import sys
import zlib


def paeth(a, b, c):
    p = a + b - c
    pa, pb, pc = abs(p - a), abs(p - b), abs(p - c)
    return a if pa <= pb and pa <= pc else (b if pb <= pc else c)


def decode(path):
    data = open(path, "rb").read()
    if data[:8] != b"\x89PNG\r\n\x1a\n":
        raise ValueError("not a PNG")
    pos, idat, width = 8, b"", 0
    while pos < len(data):
        length, kind = struct.unpack(">I4s", data[pos:pos + 8])
        body = data[pos + 8:pos + 8 + length]
        if kind == b"IHDR":
            width, height, depth, colour = struct.unpack(">IIBB", body[:10])
            if depth != 8 or colour not in (2, 6):
                raise ValueError("unexpected PNG format (depth %d, colour %d)" % (depth, colour))
            bpp = 3 if colour == 2 else 4
        elif kind == b"IDAT":
            idat += body
        pos += 12 + length
    raw = zlib.decompress(idat)
    stride = width * bpp
    rows, prev, i = [], bytearray(stride), 0
    for _ in range(height):
        f, line = raw[i], bytearray(raw[i + 1:i + 1 + stride])
        i += 1 + stride
        for x in range(stride):
            a = line[x - bpp] if x >= bpp else 0
            b, c = prev[x], (prev[x - bpp] if x >= bpp else 0)
            line[x] = (line[x] + (0, a, b, (a + b) // 2, paeth(a, b, c))[f]) & 0xff
        rows.append(line)
        prev = line
    return width, height, bpp, rows


def main(argv):
    path, want_w, want_h = argv[0], int(argv[1]), int(argv[2])
    try:
        w, h, bpp, rows = decode(path)
    except (OSError, ValueError, zlib.error) as exc:
        print("png_check: %s: %s" % (path, exc))
        return 1
    if (w, h) != (want_w, want_h):
        print("png_check: %s is %dx%d, expected %dx%d" % (path, w, h, want_w, want_h))
        return 1
    inked = coloured = 0
    for row in rows[::4]:
        for x in range(0, w * bpp, 4 * bpp):
            r, g, b = row[x], row[x + 1], row[x + 2]
            inked += (r, g, b) != (255, 255, 255)
            coloured += max(r, g, b) - min(r, g, b) > 60
    total = len(rows[::4]) * len(range(0, w * bpp, 4 * bpp))
    if inked < 0.02 * total or coloured == 0:
        print("png_check: %s looks blank (%d of %d samples inked, %d coloured)" % (path, inked, total, coloured))
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
