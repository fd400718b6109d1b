#!/usr/bin/python3
"""dtoa_repr.py - expected texts for tests/check_dtoa.c, one line each:
the double's 16 hex digits of bits, a space, the text src/common/dtoa.c
must write for it.

Oracle: CPython's repr of a float, the shortest decimal that reads back to
the same double and, among those, the closest to its exact value (CPython's
"short" float repr, David Gay's correctly rounded mode 0).  Only the digits
and the decimal exponent come from repr; the layout (plain decimal for
-5 < X < 17, otherwise d.ddde+XX) is dtoa.h's rule, written out again here.
Seeded: the same cases every run.

Usage: tests/dtoa_repr.py [COUNT]
"""
import random
import struct
import sys
from decimal import Decimal


def layout(x):
    sign, digits, exp = Decimal(repr(x)).normalize().as_tuple()
    d = "".join(map(str, digits))
    n = len(d)
    big = n + exp - 1  # the exponent of the first digit
    if d == "0":
        text = "0"
    elif -5 < big < 17:
        if exp >= 0:
            text = d + "0" * exp
        elif big >= 0:
            text = d[:big + 1] + "." + d[big + 1:]
        else:
            text = "0." + "0" * (-big - 1) + d
    else:
        text = d[0] + ("." + d[1:] if n > 1 else "") + "e" + ("-" if big < 0 else "+") + "%02d" % abs(big)
    return ("-" if sign else "") + text


def bits_of(x):
    return struct.unpack("<Q", struct.pack("<d", x))[0]


def of_bits(b):
    return struct.unpack("<d", struct.pack("<Q", b))[0]


def cases(count):
    r = random.Random(15)
    out = []
    per = count // 8
    for _ in range(per):  # any bit pattern (mostly far exponents)
        b = r.getrandbits(64)
        if (b >> 52) & 0x7FF != 0x7FF:
            out.append(of_bits(b))
    for _ in range(per):  # the sizes data have
        out.append(r.choice((-1, 1)) * 10 ** r.uniform(-7, 18))
    for _ in range(per):  # short decimals
        out.append(round(r.uniform(-1000, 1000), r.randrange(0, 8)))
    for _ in range(per):  # subnormals, small ones most
        out.append(of_bits(r.randrange(1, 1 << r.randrange(1, 53))))
    for _ in range(per):  # integers up to 2^53 and just past it
        out.append(float(r.randrange(1, 1 << r.randrange(1, 60))))
    for _ in range(per):  # powers of two and their neighbours
        b = bits_of(2.0 ** r.randrange(-1074, 1024))
        out.append(of_bits(b + r.choice((-1, 0, 1)) if b > 1 else b))
    for _ in range(per):  # powers of ten and their neighbours
        b = bits_of(float("1e%d" % r.randrange(-323, 309)))
        out.append(of_bits(b + r.randrange(-2, 3)))
    for _ in range(per):  # near the plain/scientific switch
        out.append(r.uniform(1, 10) * 10.0 ** r.choice((-6, -5, -4, 15, 16, 17)))
    return [x for x in out if x == x and abs(x) != float("inf")]


def main():
    count = int(sys.argv[1]) if len(sys.argv) > 1 else 4000
    lines = ["%016x %s" % (bits_of(x), layout(x)) for x in cases(count)]
    sys.stdout.write("\n".join(lines) + "\n")


if __name__ == "__main__":
    main()
