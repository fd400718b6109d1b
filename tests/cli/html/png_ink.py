"""Prints the share of pixels of a PNG that are not white (within 8 of
255 in each channel), decoding with zlib alone: 8-bit greyscale, RGB,
grey+alpha or RGBA, non-interlaced (what Chromium's screenshots are).
Usage: png_ink.py FILE"""
import struct
import sys
import zlib


def rows(data):
    assert data[:8] == b"\x89PNG\r\n\x1a\n", "not a PNG"
    pos, idat, ihdr = 8, b"", None
    while pos < len(data):
        n, kind = struct.unpack(">I4s", data[pos:pos + 8])
        body = data[pos + 8:pos + 8 + n]
        if kind == b"IHDR":
            ihdr = struct.unpack(">IIBBBBB", body)
        elif kind == b"IDAT":
            idat += body
        pos += 12 + n
    width, height, depth, colour, _, _, interlace = ihdr
    assert depth == 8 and interlace == 0 and colour in (0, 2, 4, 6), f"unsupported PNG {ihdr}"
    bpp = {0: 1, 2: 3, 4: 2, 6: 4}[colour]
    raw, stride, prev, out = zlib.decompress(idat), width * bpp, bytearray(width * bpp), []
    for y in range(height):
        f, line = raw[y * (stride + 1)], bytearray(raw[y * (stride + 1) + 1:(y + 1) * (stride + 1)])
        for i in range(stride):
            a = line[i - bpp] if i >= bpp else 0
            b, c = prev[i], prev[i - bpp] if i >= bpp else 0
            if f == 1:
                line[i] = (line[i] + a) & 255
            elif f == 2:
                line[i] = (line[i] + b) & 255
            elif f == 3:
                line[i] = (line[i] + (a + b) // 2) & 255
            elif f == 4:
                p = a + b - c
                pa, pb, pc = abs(p - a), abs(p - b), abs(p - c)
                line[i] = (line[i] + (a if pa <= pb and pa <= pc else b if pb <= pc else c)) & 255
        out.append(line)
        prev = line
    return width, height, bpp, out


def main():
    width, height, bpp, lines = rows(open(sys.argv[1], "rb").read())
    colours = 1 if bpp < 3 else 3
    ink = 0
    for line in lines:
        for x in range(0, len(line), bpp):
            if any(v < 247 for v in line[x:x + colours]):
                ink += 1
    print(f"{ink / (width * height):.4f}")


main()
