"""The numbers in the tables of a page written by `millrace report --html`
against the saved fits it was made from (and the scoring run's group table
given with --groups): the page's text is read with python3's html.parser,
the fits with json, and each number the page shows must be the JSON's
value rounded as the page rounds it:
- coefficient table, forest plot, fit statistics given as %.{D}g / %.8g /
  counts: D significant digits (--digits, 4 by default) for estimates,
  standard errors, statistics, intervals and ratios; 3 for p-values
  (below 1e-16: "< 1e-16"); 8 for deviances, Pearson chi-square,
  dispersion, AIC and BIC; whole numbers for rows and degrees of freedom;
  the same text exactly, a minus sign written as U+2212;
- term tests: each term's test from the JSON (distribution, df,
  statistic, p-value);
- the comparison of several fits: family, link, rows, rank, deviance,
  residual df, AIC, BIC, convergence of each JSON;
- the changes between fits: fit k's coefficient minus fit 1's, with an
  interval of half-width q sqrt(se1^2 + se2^2) (q the normal quantile, or
  Student's t on fit k's residual df when its dispersion is estimated,
  from python3's statistics.NormalDist and scipy.stats.t), exp() of all
  three where the fits give ratios: the page's text must be the rounding
  of a value within 1e-9 relative of this one (the quantile is computed
  twice, by the page and here);
- the calibration table: each group's rows, weight, fitted mean range,
  observed and expected per unit of weight, O/E, and the interval of the
  observed mean: the exact Poisson (Garwood) one for counts, chi-square
  quantiles; Clopper-Pearson for a binomial outcome, beta quantiles
  (scipy.stats.chi2 and beta, Debian's python3-scipy);
- the funnel section: each group's observed, expected and O/E, and the
  Garwood interval of the groups outside the limits, from the table;
- the numbers a dot chart writes beside its rows: its table's.
The effect plots' and curves' numbers, and the funnel's control limits,
are checked against statsmodels, R and scipy in tests/ref/html_effects.py.
Usage: check_numbers.py [--digits D] [--groups GROUPS.json] PAGE FIT.json...
Prints one line per problem and the count of numbers checked; exit status
1 on any problem."""
import json
import math
import sys
from html.parser import HTMLParser
from statistics import NormalDist

MINUS = "\u2212"


class Table:
    def __init__(self, section, figure, heading, caption=""):
        self.section, self.figure, self.heading, self.caption = section, figure, heading, caption
        self.head, self.rows = [], []


class Tables(HTMLParser):
    """Every <table> with the section, figure and h3 it lies under; each
    row a list of (tag, text, colspan)."""

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.tables, self.where = [], []
        self.h3, self.text, self.table, self.row, self.in_head, self.cell = "", None, None, None, False, None
        self.values, self.value = {}, None  # figure id: the numbers written beside a dot chart's rows

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag in ("section", "figure"):
            self.where.append((tag, a.get("id", "")))
        elif tag in ("h3", "caption"):
            self.text = []
        elif tag == "text" and a.get("class") == "value":
            fig = next((i for t, i in reversed(self.where) if t == "figure"), "")
            self.value = self.values.setdefault(fig, [])
            self.value.append("")
        elif tag == "table":
            sec = next((i for t, i in reversed(self.where) if t == "section"), "")
            fig = next((i for t, i in reversed(self.where) if t == "figure"), "")
            self.table = Table(sec, fig, self.h3)
            self.tables.append(self.table)
        elif tag == "thead":
            self.in_head = True
        elif tag == "tr" and self.table:
            self.row = []
        elif tag in ("td", "th") and self.row is not None:
            self.cell = [tag, [], int(a.get("colspan", "1"))]

    def handle_endtag(self, tag):
        if tag == "text":
            self.value = None
        elif tag in ("section", "figure") and self.where:
            self.where.pop()
        elif tag == "h3" and self.text is not None:
            self.h3, self.text = "".join(self.text).strip(), None
        elif tag == "caption" and self.text is not None:
            self.table.caption, self.text = "".join(self.text).strip(), None
        elif tag == "table":
            self.table = None
        elif tag == "thead":
            self.in_head = False
        elif tag in ("td", "th") and self.cell is not None:
            self.row.append((self.cell[0], "".join(self.cell[1]).strip(), self.cell[2]))
            self.cell = None
        elif tag == "tr" and self.row is not None:
            (self.table.head if self.in_head else self.table.rows).append(self.row)
            self.row = None

    def handle_data(self, data):
        if self.value is not None:
            self.value[-1] += data
        elif self.cell is not None:
            self.cell[1].append(data)
        elif self.text is not None:
            self.text.append(data)


class Checker:
    def __init__(self, digits):
        self.digits, self.problems, self.checked = digits, [], 0

    def bad(self, where, what):
        self.problems.append(f"{where}: {what}")

    def same(self, where, got, want):
        self.checked += 1
        if got != want:
            self.bad(where, f"page {got!r}, JSON {want!r}")

    def fmt(self, x, digits=None):
        """The page's number: %.{digits}g, U+2212 for a minus, '-' for none."""
        if x is None or (isinstance(x, float) and math.isnan(x)):
            return "-"
        if math.isinf(x):
            return ("" if x > 0 else MINUS) + "infinity"
        return ("%.*g" % (digits or self.digits, x)).replace("-", MINUS, 1) if x < 0 else "%.*g" % (digits or self.digits, x)

    def number(self, where, got, x, digits=None):
        self.same(where, got, self.fmt(x, digits))

    def near(self, where, got, x):
        """got is the rounding of a value within 1e-9 relative of x."""
        self.checked += 1
        if got not in {self.fmt(x * (1 + s * 1e-9)) for s in (-1, 0, 1)}:
            self.bad(where, f"page {got!r}, computed here {self.fmt(x)!r} ({x!r})")

    def p_value(self, where, got, p):
        self.same(where, got, "-" if p is None else "< 1e-16" if p < 1e-16 else self.fmt(p, 3))


def text(cells):
    return [c[1] for c in cells]


def ratio_of(fit):
    return fit.get("ratio_label")


# ---- one fit --------------------------------------------------------------------------


def check_data_read(ck, t, fit, where):
    rows = {r[0][1]: r[1][1] for r in t.rows if len(r) == 2}
    n = fit["rows"]
    ck.same(f"{where} rows read", rows.get("rows read"), str(n["read"]))
    ck.same(f"{where} rows used", rows.get("rows used"), str(n["used"]))
    ck.same(f"{where} rows left out", rows.get("rows left out"), str(n["read"] - n["used"]))
    for col, count in n.get("missing_by_column", {}).items():
        ck.same(f"{where} missing {col}", rows.get("missing " + col), str(count))
    for label, key in (("a model column missing", "incomplete"), ("malformed, skipped", "bad"),
                       ("used, weight 0", "zero_weight")):
        ck.same(f"{where} {label}", rows.get(label), str(n[key]) if n.get(key) else None)


def check_coefficients(ck, t, fit, where):
    coefs, ratio = fit["coefficients"], ratio_of(fit)
    robust = fit.get("robust")
    if len(t.rows) != len(coefs):
        ck.bad(where, f"{len(t.rows)} rows, the JSON has {len(coefs)} coefficients")
    for j, (row, c) in enumerate(zip(t.rows, coefs)):
        w = f"{where} {c['name']}"
        ck.same(w + " name", row[0][1], c["name"] + (" (not estimable)" if c.get("not_estimable") else ""))
        if c["aliased"]:
            ck.same(w, text(row[1:]), ["aliased (no estimate)"])
            continue
        cells = text(row[1:])
        se = robust["standard_errors"][j] if robust else c["standard_error"]
        want = [c["estimate"], se, c["statistic"], None, c["ci_low"], c["ci_high"]]
        if ratio:
            want += [c["ratio"], c["ratio_ci_low"], c["ratio_ci_high"]]
        if len(cells) != len(want):
            ck.bad(w, f"{len(cells)} numbers, want {len(want)}")
            continue
        for k, (got, x) in enumerate(zip(cells, want)):
            if k == 3:
                ck.p_value(w + " p", got, c["p_value"])
            else:
                ck.number(f"{w} column {k + 2}", got, x)


def check_term_tests(ck, t, fit, where):
    terms = fit["model"]["terms"]
    if len(t.rows) != len(terms):
        ck.bad(where, f"{len(t.rows)} rows, the JSON has {len(terms)} terms")
    for row, term in zip(t.rows, terms):
        name, kind, df, stat, p = text(row)[:5]
        w = f"{where} {term['label']}"
        test = term.get("test")
        ck.same(w, name, term["label"])
        ck.same(w + " test", kind, "none" if test is None else test["distribution"])
        ck.number(w + " df", df, test and test["df"])
        ck.number(w + " statistic", stat, test and test["statistic"])
        ck.p_value(w + " p", p, test and test["p_value"])


QUASI = ("poisson", "binomial", "negative-binomial")  # families whose dispersion is 1 unless estimated


def criterion(fit, key):
    if fit["model"]["dispersion"] == "estimate" and fit["model"]["family"] in QUASI:
        return "none (quasi family)"
    v = fit["fit"][key]
    return "not computed" if v is None else "%.8g" % v


def check_statistics(ck, t, fit, where):
    rows = {r[0][1]: r[1][1] for r in t.rows}
    s = fit["fit"]
    disp = "estimated" if fit["model"]["dispersion"] == "estimate" else "fixed"
    ck.same(where + " deviance", rows.get("deviance"), "%.8g (degrees of freedom %.0f)" % (s["deviance"], s["residual_df"]))
    ck.same(where + " null deviance", rows.get("null deviance"),
            "%.8g (degrees of freedom %.0f)" % (s["null_deviance"], s["null_df"]))
    ck.same(where + " Pearson", rows.get("Pearson chi-square"), "%.8g" % s["pearson_chi2"])
    ck.same(where + " dispersion", rows.get("dispersion"), "%.8g (%s)" % (s["dispersion"], disp))
    ck.same(where + " AIC", rows.get("AIC"), criterion(fit, "aic"))
    ck.same(where + " BIC", rows.get("BIC"), criterion(fit, "bic"))


def forest_expected(fit):
    """The forest plot's rows from the JSON: (label, coefficient or None
    for a reference level), by term."""
    model, coefs = fit["model"], fit["coefficients"]
    out = []
    for term in model["terms"]:
        out.append((term["label"], "heading"))
        j, end = term["first_coefficient"], term["first_coefficient"] + term["coefficients"]
        if term["kind"] == "factor" and len(term["columns"]) == 1:
            fac = model["factors"][term["columns"][0]["name"]]
            for level in fac["levels"]:
                if level == fac["reference"] and term["coefficients"] < len(fac["levels"]):
                    out.append((level, "reference"))
                elif j < end:
                    out.append((level, coefs[j]))
                    j += 1
        for c in coefs[j:end]:
            out.append((c["name"], c))
    return out


def estimate_cells(ck, where, cells, c, ratio):
    if c["aliased"] or c.get("not_estimable") and c["estimate"] is None:
        ck.same(where, cells, ["not estimable"])
        return
    keys = ("ratio", "ratio_ci_low", "ratio_ci_high") if ratio else ("estimate", "ci_low", "ci_high")
    for got, k in zip(cells, keys):
        ck.number(f"{where} {k}", got, c[k])


def check_forest(ck, t, fit, where):
    ratio, coefs = ratio_of(fit), fit["coefficients"]
    if len(coefs) > 60:  # the 40 of largest |statistic|, in the fit's order
        by_name = {c["name"]: c for c in coefs}
        first = 1 if fit["model"]["intercept"] else 0
        est = [c for c in coefs[first:] if not c["aliased"] and c["statistic"] is not None]
        cut = sorted(abs(c["statistic"]) for c in est)[-40]
        want = [c["name"] for c in est if abs(c["statistic"]) >= cut][:40]
        ck.same(where + " rows shown", [r[0][1] for r in t.rows], want)
        for row in t.rows:
            estimate_cells(ck, f"{where} {row[0][1]}", text(row[1:]), by_name[row[0][1]], ratio)
        return
    want = forest_expected(fit)
    ck.same(where + " labels", [r[0][1] for r in t.rows], [w[0] for w in want])
    for row, (label, c) in zip(t.rows, want):
        if c == "heading":
            ck.same(f"{where} {label}", row[0][0], "th")
        elif c == "reference":
            ck.same(f"{where} {label}", text(row[1:]), ["reference"])
        else:
            estimate_cells(ck, f"{where} {label}", text(row[1:]), c, ratio)


def calibration_interval(fit, count, weight):
    """The exact interval of a group's observed mean at the fit's level:
    Garwood's for a count (chi-square quantiles), Clopper-Pearson's for
    events out of trials (beta quantiles), from scipy.stats; at a count of
    0 (or all trials) the one bound there is is one-sided, as documented
    in src/output/exact_interval.h."""
    from scipy.stats import beta, chi2
    a = 1 - fit["options"]["level"]
    if fit["model"]["family"] == "binomial":
        lo = 0.0 if count <= 0 else beta.ppf(a / 2 if count < weight else a, count, weight - count + 1)
        hi = 1.0 if count >= weight else beta.ppf(1 - a / 2 if count > 0 else 1 - a, count + 1, weight - count)
        return lo, hi
    lo = 0.0 if count <= 0 else chi2.ppf(a / 2, 2 * count) / 2
    hi = chi2.ppf(1 - a / 2, 2 * (count + 1)) / 2 if count > 0 else chi2.ppf(1 - a, 2) / 2
    return lo / weight, hi / weight


def check_calibration(ck, t, fit, where):
    groups = fit["calibration"]["groups"]
    head = text(t.head[0]) if t.head else []
    exact = fit["model"]["family"] in ("poisson", "binomial") and fit["model"]["weight"] is None
    ck.same(where + " columns", head[8:], ["observed low", "observed high"] if exact else [])
    if len(t.rows) != len(groups):
        ck.bad(where, f"{len(t.rows)} rows, the JSON has {len(groups)} groups")
    for i, (row, g) in enumerate(zip(t.rows, groups)):
        w, cells = f"{where} group {i + 1}", text(row)
        ob, ex = g["observed"] / g["weight"], g["expected"] / g["weight"]
        ck.same(w, cells[0], str(i + 1))
        ck.number(w + " rows", cells[1], g["rows"], 17)
        for k, x in enumerate((g["weight"], g["mean_low"], g["mean_high"], ob, ex, ob / ex)):
            ck.number(f"{w} {head[k + 2] if k + 2 < len(head) else k}", cells[k + 2], x)
        if exact and len(cells) == 10:
            lo, hi = calibration_interval(fit, g["observed"], g["weight"])
            ck.near(w + " observed low", cells[8], lo)
            ck.near(w + " observed high", cells[9], hi)


# ---- several fits ---------------------------------------------------------------------


def check_comparison(ck, t, fits, names, where):
    if len(t.rows) != len(fits):
        ck.bad(where, f"{len(t.rows)} rows for {len(fits)} fits")
    for k, (row, fit) in enumerate(zip(t.rows, fits)):
        m, s, w = fit["model"], fit["fit"], f"{where} fit {k + 1}"
        want = [f"Fit {k + 1}: {names[k]}", f"{m['family']}, {m['link']}", str(s["n"]), str(s["rank"]),
                "%.8g" % s["deviance"], "%.0f" % s["residual_df"], criterion(fit, "aic"), criterion(fit, "bic"),
                "yes" if fit["convergence"]["converged"] else "NO"]
        ck.same(w, text(row), want)


def quantile(fit):
    level = fit["options"]["level"]
    if fit["model"]["dispersion"] == "estimate":
        from scipy.stats import t
        return t.ppf(1 - (1 - level) / 2, fit["fit"]["residual_df"])
    return NormalDist().inv_cdf(1 - (1 - level) / 2)


def check_changes(ck, t, first, later, where):
    ratio = ratio_of(first) and first["model"]["link"] == later["model"]["link"]
    old = {c["name"]: c for c in first["coefficients"]}
    q, want = quantile(later), []
    starts = {term["first_coefficient"]: term["label"] for term in later["model"]["terms"]}
    for j, c in enumerate(later["coefficients"]):
        if j == 0 and later["model"]["intercept"]:
            continue
        if j in starts:
            want.append((starts[j], "heading"))
        if c["name"] in old:
            want.append((c["name"], c))
    ck.same(where + " labels", [r[0][1] for r in t.rows], [w[0] for w in want])
    for row, (label, c) in zip(t.rows, want):
        w, cells = f"{where} {label}", text(row[1:])
        if c == "heading":
            ck.same(w, row[0][0], "th")
            continue
        b = old[label]
        if b["aliased"] or c["aliased"]:
            ck.same(w, cells, ["not estimable"])
            continue
        d = c["estimate"] - b["estimate"]
        se = math.sqrt(b["standard_error"] ** 2 + c["standard_error"] ** 2)
        vals = (d, d - q * se, d + q * se)
        ck.number(w + " change", cells[0], math.exp(d) if ratio else d)
        for got, x, k in zip(cells[1:], vals[1:], ("low", "high")):
            ck.near(f"{w} {k}", got, math.exp(x) if ratio else x)


def check_funnel(ck, tables, groups_path):
    table = json.load(open(groups_path))
    by_label = {", ".join(f"{k}={v if v is not None else '(blank)'}" for k, v in g["key"].items()): g
                for g in table["groups"]}
    main = [t for t in tables if t.figure == "funnel"]
    if not main:
        ck.bad("funnel", "no table")
        return
    drawn = [g for g in by_label.values() if g["expected"] and g["expected"] > 0]
    if len(main[0].rows) != len(drawn):
        ck.bad("funnel", f"{len(main[0].rows)} rows, the table has {len(drawn)} groups with an expected count")
    for row in main[0].rows:
        cells, g = text(row), by_label.get(row[0][1])
        if g is None:
            ck.bad("funnel", f"group {row[0][1]!r} not in {groups_path}")
            continue
        for got, x, k in zip(cells[1:4], (g["observed"], g["expected"], g["o_e"]), ("observed", "expected", "O/E")):
            ck.number(f"funnel {row[0][1]} {k}", got, x)
    for t in tables:
        if t.section == "groups" and t.caption.startswith("Groups outside"):
            for row in t.rows:
                cells, g = text(row), by_label.get(row[0][1], {})
                for got, k in zip(cells[1:4], ("o_e", "o_e_low", "o_e_high")):
                    ck.number(f"funnel outside {row[0][1]} {k}", got, g.get(k))


# ---- the page -----------------------------------------------------------------------


def one(tables, pred):
    found = [t for t in tables if pred(t)]
    return found[0] if len(found) == 1 else None


def check_fit(ck, tables, k, fit):
    sec, where = f"fit-{k + 1}", f"fit {k + 1}"
    parts = (("Data read", check_data_read), ("Coefficients", check_coefficients),
             ("Term tests", check_term_tests), ("Fit statistics", check_statistics))
    for heading, check in parts:
        t = one(tables, lambda t: t.section == sec and not t.figure and t.heading == heading)
        if t is None and heading == "Term tests" and not fit["model"]["terms"]:
            continue
        if t is None:
            ck.bad(where, f"no single table under '{heading}'")
        else:
            check(ck, t, fit, f"{where} {heading.lower()}:")
    t = one(tables, lambda t: t.figure == f"forest-{k + 1}")
    if t is None:
        ck.bad(where, "no forest plot table")
    else:
        check_forest(ck, t, fit, f"{where} forest plot:")
    t = one(tables, lambda t: t.figure == f"calibration-{k + 1}")
    if (t is None) != (not fit.get("calibration")):
        ck.bad(where, "a calibration table without calibration groups, or none with them")
    elif t is not None:
        check_calibration(ck, t, fit, f"{where} calibration:")


def check_beside_rows(ck, p):
    """A dot chart writes each row's numbers beside it: the same as its
    table's, as "estimate (low, high)", "reference" or "not estimable"."""
    for t in p.tables:
        if t.figure not in p.values:
            continue
        want = []
        for row in t.rows:
            cells = text(row)
            if row[0][0] == "th":
                continue
            want.append(cells[1] if len(cells) == 2 else f"{cells[1]} ({cells[2]}, {cells[3]})")
        ck.same(f"{t.figure}: the numbers beside the rows", p.values[t.figure], want)


def main(argv):
    digits, groups = 4, None
    while argv and argv[0].startswith("--"):
        opt, val, argv = argv[0], argv[1], argv[2:]
        if opt == "--digits":
            digits = int(val)
        elif opt == "--groups":
            groups = val
        else:
            sys.exit(f"unknown option {opt}")
    page, paths = argv[0], argv[1:]
    p = Tables()
    p.feed(open(page, encoding="utf-8").read())
    p.close()
    fits = [json.load(open(path)) for path in paths]
    ck = Checker(digits)
    for k, fit in enumerate(fits):
        check_fit(ck, p.tables, k, fit)
    if len(fits) > 1:
        t = one(p.tables, lambda t: t.section == "comparison" and not t.figure)
        if t is None:
            ck.bad("comparison", "no table")
        else:
            check_comparison(ck, t, fits, paths, "comparison:")
        for k in range(1, len(fits)):
            t = one(p.tables, lambda t: t.figure == f"change-{k + 1}")
            if t is None:
                ck.bad(f"change-{k + 1}", "no table")
            else:
                check_changes(ck, t, fits[0], fits[k], f"changes 1 to {k + 1}:")
    if groups:
        check_funnel(ck, p.tables, groups)
    check_beside_rows(ck, p)
    for line in ck.problems[:40]:
        print(line)
    if len(ck.problems) > 40:
        print(f"... {len(ck.problems) - 40} more")
    print(f"{ck.checked} numbers checked, {len(ck.problems)} wrong")
    return 1 if ck.problems or ck.checked == 0 else 0


sys.exit(main(sys.argv[1:]))
