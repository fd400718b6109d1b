#!/usr/bin/python3
"""Writes the fuzz targets' seed corpora, tests/fuzz/corpus/TARGET/.

The seeds are the malformed (and a few well-formed) inputs of the unit and
command-line tests - tests/check_input.c, tests/check_numparse.c,
tests/cli/errors.sh - and the bundled samples, each with the control bytes
its target reads first (see the comment at the top of each fuzz_*.c).
Needs the zstd and gzip commands, and build/millrace (`make`) for the fits
of the samples.  Run from the top of the tree; rewrites the seeds of the
targets named (`tests/fuzz/make_corpus.py zframes`), or of all of them.
"""
import os
import shutil
import subprocess
import sys
import tempfile

HERE = os.path.dirname(os.path.abspath(__file__))


def good_rows():
    """tests/cli/errors.sh's good_rows: y,g,x,s,t,e,w,z for i in 1..40."""
    out = []
    for i in range(1, 41):
        g = "B" if i % 3 == 0 else "A"
        out.append("%d,%s,%d.5,%d,%d,%d.25,%d.5,%d.75\n" % (
            i % 7, g, i % 5, i % 4, i % 4 + 2, i % 6 + 1, i % 3 + 1, i % 9 + 1))
    return out


HEADER = "y,g,x,s,t,e,w,z\n"
R = good_rows()

# name -> CSV text, from tests/cli/errors.sh (malformed input, domain errors)
# and tests/check_input.c (splitter and field cases).
CSV = {
    "good": HEADER + "".join(R),
    "duplicate_header": "y,g,x,g\n1,A,2,B\n2,B,3,A\n",
    "wrong_field_count": HEADER + "".join(R[:2]) + "3,A,1.5\n" + "".join(R[-5:]),
    "unparsable_number": HEADER + R[0] + "2,B,12x,1,2,1.5,1.5,1.5\n" + "".join(R[-5:]),
    "unterminated_quote": HEADER + "".join(R[:3]) + '1,"A,2.5,1,2,1.5,1.5,1.5\n2,B,1.5,1,2,1.5,1.5,1.5\n',
    "empty": "",
    "header_only": HEADER,
    "all_missing": HEADER + "".join("NA," + r.split(",", 1)[1] for r in R),
    "negative_count": HEADER + R[0] + "-1,A,1.5,1,2,1.5,1.5,1.5\n" + "".join(R[-3:]),
    "successes_exceed_trials": "s,t,y,g,x\n1,2,0,A,1\n5,3,1,A,1.5\n2,2,1,B,2\n",
    "gamma_zero": "z,x,w\n0,1.5,1\n1.75,2.5,1\n",
    "exposure_zero": "y,g,x,e\n1,A,1.5,2\n1,A,1.5,0\n3,B,2.5,1.25\n",
    "negative_weight": "z,x,w\n1.5,1.5,1\n1.5,2.5,-2\n",
    "two_bad_rows": HEADER + "".join(R[:10]) + "3,A,1.5\n" + "".join(R[-20:]) + "1,B,2.5,1,2,1.5,1.5,1.5,9\n",
    "embedded_newlines": 'h1,h2,h3\n1,"a\nb",c\n\n2,x,y\r\n3,"p\r\nq\r\nr",s\n\r\n4,y,z',
    "blank_lines_before_header": "\n\r\nh1,h2\n1,2\n",
    "unterminated_quote_small": 'h1,h2\n1,ok\n2,"open\n3,x\n',
    "blank_only_row": 'h\na\n   \t\r\n"b"\n',
    "malformed_quoting": 'h,i,j\n1,"ab"c,2\n',
    "python_csv_cases": 'a,b,c\na,b,c\n"a,b",c\n"say ""hi""",x\n"line1\nline2",z\n"a\r\nb",c\r\n,,\n"",x\nx,""\n""""\np,q\r\nr,s\r\n1,"2"\n3,4',
    "tabs": 'a\tb\tc\na\tb\tc\n"x\ty"\tz\na,b\tc\n',
    "semicolons": 'a;b;c\na;b;c\n"1;2";3,5\n',
    "trimming": 'p,q,r\n  a  , b ,c\t\na b , c d\r\n , \nx,y\r\n" a ",b \n  "q",  r  \r\n',
    "bom_quoted_header": '\xef\xbb\xbf"id";"v w"\r\n1;2\n',
    "bom_header": "\xef\xbb\xbfid,value\n1,2\n",
    "header_no_newline": " a , b ",
    "quoted_header": '"first name",age,"x ""q""","a,b"\nJo,3,4,5\n',
    "numeric_missing_token": "y,x\n-1,2\n3,-1\nNA,4\n5,\n",
    "cr_inside_row": "y,x\n1\r,2\n3,4\r\r\n",
}

# (flags, sizes byte, read-size bytes): in place or not, each delimiter
# choice, skip or fail, each family, repeated or not, both token sets.
PREFIXES = [
    (0x00, 0x00, [255]),
    (0x01, 0x01, [0, 6]),
    (0x3a, 0x02, [2, 16, 0]),
    (0x55, 0x07, [3, 200, 1, 9]),
    (0xe3, 0x04, [10]),
]


def write(target, name, data):
    d = os.path.join(HERE, "corpus", target)
    os.makedirs(d, exist_ok=True)
    with open(os.path.join(d, name), "wb") as f:
        f.write(data)


def rowsplit():
    for k, (name, text) in enumerate(sorted(CSV.items())):
        body = text.encode("latin-1")
        for j in (k % len(PREFIXES), (k + 2) % len(PREFIXES)):
            flags, sizes, reads = PREFIXES[j]
            write("rowsplit", "%s-%d" % (name, j), bytes([flags, sizes] + reads) + body)
    # several chunks: short rows repeated (flag bit 6)
    write("rowsplit", "many_chunks", bytes([0x41, 0xc5, 40, 255]) + b"y,x\n1,2\n\n3,\"4\"\n5,6\r\n")
    # the header rules of rowsplit.c: a byte-order mark and blanks make a
    # blank line; lone carriage returns in the header are refused
    write("rowsplit", "bom_blank_line", bytes([0, 0, 0]) + b"\xef\xbb\xbf\n  \na,b\n1,2\n")
    write("rowsplit", "cr_only_lines", bytes([0, 0, 0]) + b"a,b\r1,2\r")
    write("rowsplit", "bom_crlf_then_cr", bytes([0, 0, 0]) + b"\xef\xbb\xbf\r\na\rb\n1\n")


NUMBERS = [
    # tests/check_numparse.c: zeros and signs
    "-0", "0.0e0", "+0", "-0.0", "0", "000", ".0", "0.", "-.0e5", "0e-999999",
    "-0e+99999999999999999999999999", "+1", "-1", "1.", ".5", "-.5e1", "5E-1", "1e+0", "1e-0",
    # rejected fields
    "", " ", "\t", "abc", "1.2.3", "1e", "1e+", "1e-", "--1", "+-1", "0x10", "0X1p3", "inf", "-inf",
    "nan", "Infinity", "1,5", "1 2", ".", "-", "+", "-.", "e5", ".e5", "1e5.0", "1e5e5", "1.5x",
    "1e400", "-1e400", "1.7976931348623159e308", "1e99999999999999999999", "1\n", "\r1", "1\r",
    "1_000", "\xd9\xa1", "1e 5", "- 1", "1234567:", "1234567/", ":2345678", "/2345678",
    "12345678:2345678", "0.12345678/2345678", "1234567\x8012345678", "12345678\xff2345678", "1\x00",
    # blanks, short decimals, the inline parser's edge (15 and 16 digits)
    " 12 ", "\t3.5", "  -0.25\t\t", "\t 1e3 \t", "2017", "0.25", "-3.5e2", "123456789012345",
    "1234567890123456", "-0.000000000000001", "99999999999999.9",
    # the edges of double: DBL_MAX, subnormals, halfway cases
    "1.7976931348623157e308", "1.7976931348623158e308", "2.2250738585072011e-308",
    "2.2250738585072014e-308", "4.9406564584124654e-324", "2.4703282292062327e-324",
    "2.4703282292062328e-324", "9007199254740993", "9007199254740992.5", "18446744073709551615",
    "9999999999999999999", "0." + "0" * 400 + "15e401",
    "9007199254740993." + "0" * 700 + "1",
]


def numparse():
    for k, s in enumerate(NUMBERS):
        write("numparse", "n%03d" % k, bytes([k % 4]) + s.encode("latin-1"))


def model():
    seeds = {}
    for name in ("falls", "screening"):
        with open(os.path.join(HERE, "..", "..", "samples", name + ".model"), "rb") as f:
            seeds[name] = f.read()
    # tests/cli/errors.sh's model errors, and each directive of the README
    seeds["unknown_family"] = b"outcome y\nfamily frobnicate\nnumeric x\n"
    seeds["link_not_allowed"] = b"outcome y\nfamily poisson\nlink logit\nnumeric x\n"
    seeds["reference_level"] = b"outcome y\nfamily poisson\nfactor g ref=ZZZ\nfactor \"a b\" ref=\"c d\"\n"
    seeds["every_directive"] = (b"outcome s\ntrials t\nfamily binomial\nlink cloglog\nweight w\noffset o\n"
                                b"numeric x\nfactor g\ninteract x g\nintercept no\ndispersion estimate\n")
    seeds["exposure_gamma"] = b"outcome z\nfamily gamma\nlink log\nexposure e\nnumeric x # comment\n\n   \n"
    seeds["malformed_lines"] = (b"outcome\nfactor g ref=\nfactor g REF=x\ninteract a\ninteract a a\n"
                                b"interact a b c d\noutcome \"open\nintercept maybe\na b c d e f g h i\n"
                                b"numeric x\r\n#only a comment\n")
    seeds["long_line"] = b"numeric " + b"x" * 5000 + b"\n"
    seeds["no_outcome"] = b"numeric x\ninteract x y\n"
    for k, (name, text) in enumerate(sorted(seeds.items())):
        write("model", name, bytes([k % 4]) + text)


def zstd():
    tmp = tempfile.mkdtemp()
    try:
        def compress(data, *opts):
            p = os.path.join(tmp, "in")
            with open(p, "wb") as f:
                f.write(data)
            subprocess.run(["zstd", "-q", "-f", *opts, "-o", p + ".zst", p], check=True)
            with open(p + ".zst", "rb") as f:
                return f.read()
        text = CSV["good"].encode()
        z = compress(text)
        a, b = b"h,x\n1,2\n3,4\n", b'5,6\n7,"8\n9"\n'
        skip = bytes([0x50, 0x2A, 0x4D, 0x18, 5, 0, 0, 0]) + b"junk!"
        seeds = {
            # tests/check_input.c's source cases
            "roundtrip": z,
            "no_checksum": compress(text, "--no-check"),
            "concatenated": compress(a) + compress(b),
            "skippable_first": skip + compress(b"h\n1\n2\n"),
            "truncated": z[:-10],
            "corrupt": z[:len(z) // 2] + bytes(c ^ 0x5A for c in z[len(z) // 2:len(z) // 2 + 16]) + z[len(z) // 2 + 16:],
            "tiny_empty": b"", "tiny_a": b"a", "tiny_ab": b"ab\n", "tiny_magic_prefix": b"(\xb5/",
            "plain_csv": text,
            "magic_only": b"(\xb5/\xfd",
            "skippable_only": skip,
            "trailing_garbage": z + b"garbage",
            "level19": compress(text * 4, "-19"),
        }
        for k, (name, data) in enumerate(sorted(seeds.items())):
            write("zstd", name, bytes([k * 37 % 256, k * 53 % 256]) + data)
    finally:
        shutil.rmtree(tmp)


def zframes():
    """Streams of several frames for the frame threads: with and without
    their sizes, pzstd's layout (a skippable frame before each), more
    frames than the ring of threads + 2 slots, and damaged ones."""
    tmp = tempfile.mkdtemp()
    try:
        def compress(data, *opts, stdin=False):
            p = os.path.join(tmp, "in")
            with open(p, "wb") as f:
                f.write(data)
            if stdin:  # a pipe into zstd: no content size in the header
                with open(p, "rb") as f:
                    return subprocess.run(["zstd", "-q", "-c", *opts], stdin=f, check=True,
                                          stdout=subprocess.PIPE).stdout
            subprocess.run(["zstd", "-q", "-f", *opts, "-o", p + ".zst", p], check=True)
            with open(p + ".zst", "rb") as f:
                return f.read()

        def skippable(payload):
            return bytes([0x50, 0x2A, 0x4D, 0x18]) + len(payload).to_bytes(4, "little") + payload

        lines = CSV["good"].encode().splitlines(keepends=True)
        pieces = [b"".join(lines[i:i + 5]) for i in range(0, len(lines), 5)]
        sized = [compress(p) for p in pieces]
        unsized = [compress(p, stdin=True) for p in pieces]
        many = b"".join(compress(b"y,x\n" if i == 0 else b"%d,%d\n" % (i, i * 7)) for i in range(14))
        mid = len(sized[0]) + len(sized[1]) // 2
        seeds = {
            "frames_sized": b"".join(sized),
            "frames_unsized": b"".join(unsized),
            "frames_mixed": b"".join(s if k % 2 else u for k, (s, u) in enumerate(zip(sized, unsized))),
            "frames_pzstd_layout": b"".join(skippable(len(f).to_bytes(4, "little")) + f for f in sized),
            "frames_many_small": many,
            "frames_no_checksum": b"".join(compress(p, "--no-check") for p in pieces),
            "frames_empty_between": sized[0] + compress(b"") + sized[1],
            "frames_truncated": b"".join(sized)[:mid],
            "frames_corrupt_second": sized[0] + bytes(c ^ 0x5A for c in sized[1][:24]) + sized[1][24:],
            "frames_trailing_garbage": b"".join(sized) + b"garbage",
            "frames_level19": compress(CSV["good"].encode() * 4, "-19") + sized[0],
            "one_frame": compress(CSV["good"].encode()),
            "skippable_only": skippable(b"junk!"),
        }
        for k, (name, data) in enumerate(sorted(seeds.items())):
            write("zframes", name, bytes([k, k * 37 % 256, k * 53 % 256]) + data)
    finally:
        shutil.rmtree(tmp)


def run_tool(args):
    subprocess.run(args, check=True, stdout=subprocess.DEVNULL)


def fitjson():
    """Fits of the samples as build/millrace writes them, and damaged copies.
    The falls fit is of a smaller model than samples/falls.model (no age band,
    no interaction), so that it stays under run.sh's -max_len."""
    tmp = tempfile.mkdtemp()
    try:
        small = os.path.join(tmp, "falls_small.model")
        with open(small, "w") as f:
            f.write("outcome admissions\nfamily poisson\nexposure person_years\n"
                    "factor sex\nfactor region\nnumeric year\n")
        fits = {}
        for name, model, data in (("falls", small, "samples/falls.csv.zst"),
                                  ("screening", "samples/screening.model", "samples/screening.csv")):
            out = os.path.join(tmp, name + ".json")
            run_tool(["build/millrace", "fit", "--quiet", "--model", model, "--json", out, data])
            with open(out, "rb") as f:
                fits[name] = f.read()
        s = fits["screening"]
        seeds = dict(fits)
        seeds["truncated"] = s[:len(s) // 2]
        seeds["wrong_version"] = s.replace(b'"format_version": 3', b'"format_version": 99', 1)
        with open(os.path.join(HERE, "..", "cli", "fit_format2.json"), "rb") as f:
            seeds["falls_format2"] = f.read()  # an older format the reader still takes
        seeds["wrong_format"] = s.replace(b'"millrace-fit"', b'"millrace-drift"', 1)
        seeds["wrong_type"] = s.replace(b'"family": "binomial"', b'"family": 7', 1)
        seeds["not_json"] = b"outcome y\nfamily poisson\n"
        seeds["empty_object"] = b"{}"
        for name, data in seeds.items():
            write("fitjson", name, data)
    finally:
        shutil.rmtree(tmp)


def gzip():
    tmp = tempfile.mkdtemp()
    try:
        def compress(data, *opts):
            p = os.path.join(tmp, "in")
            with open(p, "wb") as f:
                f.write(data)
            run_tool(["gzip", "-n", "-f", *opts, p])
            with open(p + ".gz", "rb") as f:
                return f.read()
        with open(os.path.join(HERE, "..", "..", "samples", "screening.csv"), "rb") as f:
            lines = b"".join(f.readlines()[:12])
        a, b = b"h,x\n1,2\n3,4\n", b'5,6\n7,"8\n9"\n'
        z = compress(lines)
        seeds = {
            "sample_lines": z,
            "two_members": compress(a) + compress(b),
            "truncated": z[:len(z) - 7],
            "trailing_garbage": compress(a) + b"garbage",
            "corrupt_crc": z[:-8] + bytes(c ^ 0xFF for c in z[-8:-4]) + z[-4:],
            "level1_good": compress(CSV["good"].encode(), "-1"),
            "empty_member": compress(b""),
            "magic_only": b"\x1f\x8b",
            "plain_csv": a,
            "tiny_empty": b"",
        }
        for k, (name, data) in enumerate(sorted(seeds.items())):
            write("gzip", name, bytes([k * 37 % 256, k * 53 % 256]) + data)
    finally:
        shutil.rmtree(tmp)


if __name__ == "__main__":
    # the targets named (all by default): each one's seeds rewritten
    makers = {"rowsplit": rowsplit, "numparse": numparse, "model": model, "zstd": zstd,
              "fitjson": fitjson, "gzip": gzip, "zframes": zframes}
    for t in sys.argv[1:] or list(makers):
        shutil.rmtree(os.path.join(HERE, "corpus", t), ignore_errors=True)
        makers[t]()
