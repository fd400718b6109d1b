"""checksum.py FILE: the input checksum of a fit of FILE, from its documented
definition (README, JSON output: FNV-1a 64 over the file's bytes as stored,
taken as little-endian 64-bit words, a final partial word zero-padded),
written independently of src/common/checksum.c."""
import struct
import sys

data = open(sys.argv[1], "rb").read()
h, prime, cut = 0xcbf29ce484222325, 0x100000001b3, len(data) // 8 * 8
for i in range(0, cut, 8):
    h = ((h ^ struct.unpack("<Q", data[i:i + 8])[0]) * prime) % 2**64
if cut < len(data):
    h = ((h ^ int.from_bytes(data[cut:].ljust(8, bytes(1)), "little")) * prime) % 2**64
print("fnv1a64w:%016x" % h)
