#!/usr/bin/env python3
"""Checks a PNG screenshot of a report page has real content: decodes the PNG itself (ISO/IEC
15948: chunks, zlib IDAT, the five row filters) and counts colours, dark ink and white paper.
usage: screenshot_check.py SHOT.png [MIN_COLOURS]; prints the figures, exits 1 when short."""
import struct
import sys
import zlib


def decode(path):
    data = open(path, 'rb').read()
    assert data[:8] == b'\x89PNG\r\n\x1a\n', 'not a PNG'
    pos, idat = 8, b''
    while pos < len(data):
        n, = struct.unpack('>I', data[pos:pos + 4])
        kind, body = data[pos + 4:pos + 8], data[pos + 8:pos + 8 + n]
        pos += 12 + n
        if kind == b'IHDR':
            width, height, depth, colour = struct.unpack('>IIBB', body[:10])
        elif kind == b'IDAT':
            idat += body
    assert depth == 8 and colour in (2, 6), f'unexpected PNG type depth {depth} colour {colour}'
    bpp = 3 if colour == 2 else 4
    raw, stride = zlib.decompress(idat), width * bpp
    prev, rows = bytearray(stride), []
    for y in range(height):
        kind = raw[y * (stride + 1)]
        line = bytearray(raw[y * (stride + 1) + 1:(y + 1) * (stride + 1)])
        if kind == 1:
            for x in range(bpp, stride): line[x] = (line[x] + line[x - bpp]) & 255
        elif kind == 2:
            for x in range(stride): line[x] = (line[x] + prev[x]) & 255
        elif kind == 3:
            for x in range(stride): line[x] = (line[x] + ((line[x - bpp] if x >= bpp else 0) + prev[x]) // 2) & 255
        elif kind == 4:
            for x in range(stride):
                a = line[x - bpp] if x >= bpp else 0; b = prev[x]; c = prev[x - bpp] if x >= bpp else 0
                p = a + b - c; pa, pb, pc = abs(p - a), abs(p - b), abs(p - c)
                line[x] = (line[x] + (a if pa <= pb and pa <= pc else b if pb <= pc else c)) & 255
        rows.append(line)
        prev = line
    return width, height, bpp, rows


def main():
    width, height, bpp, rows = decode(sys.argv[1])
    min_colours = int(sys.argv[2]) if len(sys.argv) > 2 else 200
    colours, ink, paper = set(), 0, 0
    for line in rows:
        for x in range(0, width * bpp, bpp):
            r, g, b = line[x], line[x + 1], line[x + 2]
            colours.add((r, g, b))
            ink += r + g + b < 150
            paper += r + g + b > 720
    total = width * height
    print(f'screenshot {width}x{height}: {len(colours)} colours, {ink} dark, {paper} white pixels')
    ok = len(colours) >= min_colours and ink >= total // 200 and total // 4 <= paper <= total * 99 // 100
    print(('ok   ' if ok else 'FAIL ') + 'screenshot has the page content')
    sys.exit(0 if ok else 1)


main()
