"""Checks a page written by `millrace report --html`, with the standard
library only: well-formed (every element closed in order, HTML's void
elements aside), each SVG plot well-formed XML with a title, a desc, an
aria-label, drawn marks and its axes labelled, no two kinds of mark
told apart by colour alone (grey print), every colour of the page from
the Okabe-Ito palette or a grey, no reference to anything outside the file, and
the sections asked for; and the page parses as HTML5 with html5lib in
strict mode (Debian's python3-html5lib, a test package), which stops at the
first parse error of the HTML5 specification's parsing algorithm.
Usage: check_page.py PAGE SECTION-ID...
Prints one line per problem; exit status 1 if any."""
import re
import sys
import xml.etree.ElementTree as ET
from html.parser import HTMLParser

VOID = {"meta", "br", "hr", "img", "input", "link", "col", "wbr", "source", "area", "base", "embed", "param", "track"}
SVG_EMPTY = {"line", "rect", "circle", "path"}


class Nesting(HTMLParser):
    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.stack, self.problems, self.ids = [], [], set()

    def handle_starttag(self, tag, attrs):
        for k, v in attrs:
            if k == "id":
                self.ids.add(v)
            if k in ("src", "href") and v and not v.startswith("#"):
                self.problems.append(f"reference outside the page: {k}={v!r}")
        if tag in ("script", "link", "img", "iframe", "object", "embed"):
            self.problems.append(f"<{tag}> in the page")
        if tag not in VOID:
            self.stack.append((tag, self.getpos()))

    def handle_startendtag(self, tag, attrs):
        self.handle_starttag(tag, attrs)
        if tag not in VOID:
            self.stack.pop()

    def handle_endtag(self, tag):
        if not self.stack or self.stack[-1][0] != tag:
            self.problems.append(f"</{tag}> at {self.getpos()} closes {self.stack[-1] if self.stack else 'nothing'}")
            return
        self.stack.pop()


def html5_errors(raw):
    try:
        import html5lib
    except ImportError:
        return ["python3-html5lib is not installed (make test-deps installs it)"]
    try:
        html5lib.HTMLParser(strict=True).parse(raw)
    except html5lib.html5parser.ParseError as e:
        return [f"not valid HTML5 (html5lib, strict): {e}"]
    return []


# The colours the page may use: the Okabe-Ito blue and vermillion (Okabe
# and Ito, "Color Universal Design", 2008), a light tint of the blue for
# bands, and greys (equal red, green and blue) for everything else.
PALETTE = {"0072b2", "d55e00", "cfe3f1"}
SVG = "{http://www.w3.org/2000/svg}"


def colour_problems(text):
    bad = set()
    for c in re.findall(r"#([0-9a-fA-F]{6}|[0-9a-fA-F]{3})\b(?![0-9a-fA-F;])", text):
        c = c.lower()
        full = "".join(ch * 2 for ch in c) if len(c) == 3 else c
        if full not in PALETTE and not (full[0:2] == full[2:4] == full[4:6]):
            bad.add("#" + c)
    return [f"a colour outside the Okabe-Ito palette and greys: {c}" for c in sorted(bad)]


def axis_problems(fid, svg):
    """Every plot's value axis labelled (an x-y chart: both axes), in
    words, not empty."""
    labels = [("".join(e.itertext())).strip() for e in svg.iter()
              if e.tag in ("text", SVG + "text") and "axis" in (e.get("class") or "").split()]
    want = 1 if fid.split("-")[0] in ("forest", "effect", "change") else 2
    if len([a for a in labels if a]) < want:
        return [f"{fid}: {len(labels)} axis labels, want {want}"]
    return []


def grey_print_problems(fid, svg):
    """No two marks that differ in colour alone: in grey print the blue and
    the vermillion are about the same grey, so shape (element), filling
    or dashes must tell them apart too."""
    seen = {}
    for e in svg.iter():
        if "mark" not in (e.get("class") or "").split():
            continue
        tag, fill = e.tag.replace(SVG, ""), (e.get("fill") or "none").lower()
        filled = fill not in ("none", "#fff")
        colour = fill if filled else (e.get("stroke") or "")
        key = (tag, e.get("class"), filled, fill == "#fff", e.get("stroke-dasharray"))
        seen.setdefault(key, set()).add(colour.lower())
    mixed = [k for k, c in seen.items() if len(c - {"#fff", "#000"}) > 1]
    return [f"{fid}: marks {k[0]} told apart by colour alone" for k in mixed]


def main():
    path, sections = sys.argv[1], sys.argv[2:]
    raw = open(path, "rb").read()
    problems = []
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as e:
        print(f"not UTF-8: {e}")
        return 1
    if re.search(r"https?://", text, re.I):
        problems.append("an http:// or https:// reference")
    if re.search(r"url\(|@import|@font-face", text):
        problems.append("a style that loads something")
    problems += colour_problems(re.sub(r"&#[0-9]+;", "", text))
    if re.search(r"[\x00-\x08\x0b\x0c\x0e-\x1f\x7f]", text):
        problems.append("a control character in the text")
    problems += html5_errors(raw)
    p = Nesting()
    p.feed(text)
    p.close()
    problems += p.problems
    if p.stack:
        problems.append(f"unclosed: {p.stack[-3:]}")
    figures = re.findall(r'<figure id="([^"]+)">(.*?)</figure>', text, re.S)
    if not figures:
        problems.append("no plot")
    for fid, body in figures:
        m = re.search(r"<svg .*?</svg>", body, re.S)
        if not m:
            problems.append(f"{fid}: no svg")
            continue
        try:
            svg = ET.fromstring(m.group(0))
        except ET.ParseError as e:
            problems.append(f"{fid}: SVG not well-formed XML: {e}")
            continue
        if svg.find("title") is None or svg.find("desc") is None or not svg.get("aria-label"):
            problems.append(f"{fid}: no title, desc or aria-label")
        marks = [e for e in svg.iter() if "mark" in (e.get("class") or "").split()]
        if not marks:
            problems.append(f"{fid}: no marks drawn")
        if "<details>" not in body or "<table" not in body:
            problems.append(f"{fid}: no data table")
        problems += axis_problems(fid, svg)
        problems += grey_print_problems(fid, svg)
    for s in sections:
        if s not in p.ids:
            problems.append(f"section {s} missing")
    for line in problems:
        print(line)
    return 1 if problems else 0


sys.exit(main())
