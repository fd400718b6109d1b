#!/usr/bin/python3
"""Natural cubic spline terms against R's splines::ns and glm.

  reference: R splines::ns (Debian r-base-core), run here through
             /usr/bin/Rscript: the basis columns for given knots (inside,
             at and beyond the boundary knots), the knots ns() places at
             df= (quantile type 7), and poisson rate models with a spline
             term (alone and times a factor) fitted by glm() with ns().
millrace's basis comes from build/tests/check_spline --print-basis; its knots
and coefficients from build/millrace fit --json.  Skipped (and said so) when
R is not installed.

Prints "ok <case>" or "FAIL <case>: <details>" and a closing
"N passed, M failed" line; exits 1 if anything failed.
"""
import json
import os
import random
import subprocess
import sys
import tempfile

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from compare_reference import run_checks  # noqa: E402  (the ok/FAIL lines and the count)

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
MILLRACE = os.path.join(ROOT, "build", "millrace")
BASIS = os.path.join(ROOT, "build", "tests", "check_spline")
RSCRIPT = "/usr/bin/Rscript"

BASIS_TOL = 1e-12   # basis values (of order 1), absolute
REL_TOL = 1e-8      # coefficients and standard errors, relative
# Collapsed covariate patterns regroup the sums (DEVELOPERS.md, speed
# paths): standard errors agree with the row-by-row fit to about 1e-6.
COLLAPSED_TOL = 1e-6


def r_eval(code):
    out = subprocess.run([RSCRIPT, "--vanilla", "-e", code], capture_output=True, text=True)
    if out.returncode != 0:
        raise RuntimeError("Rscript failed: " + out.stderr)
    return out.stdout


def r_vector(values):
    return "c(%s)" % ",".join(repr(float(v)) for v in values)


def basis_case(knots, boundary, xs):
    mine = subprocess.run([BASIS, "--print-basis", ",".join(repr(k) for k in knots),
                           ",".join(repr(b) for b in boundary)],
                          input="\n".join(repr(x) for x in xs), capture_output=True, text=True, check=True)
    got = [[float(v) for v in line.split()] for line in mine.stdout.splitlines()]
    code = ("b <- splines::ns(%s, knots=%s, Boundary.knots=%s); "
            "for (i in seq_len(nrow(b))) cat(sprintf('%%.17g', b[i, ]), '\\n')"
            % (r_vector(xs), r_vector(knots) if knots else "NULL", r_vector(boundary)))
    want = [[float(v) for v in line.split()] for line in r_eval(code).splitlines()]
    problems = []
    if len(got) != len(want) or any(len(a) != len(b) for a, b in zip(got, want)):
        problems.append("shape %s vs R %s" % ([len(r) for r in got], [len(r) for r in want]))
    else:
        for x, a, b in zip(xs, got, want):
            for c, (u, v) in enumerate(zip(a, b)):
                if abs(u - v) > BASIS_TOL:
                    problems.append("x=%r column %d: %r, R %r" % (x, c + 1, u, v))
    return problems[:5]


def write_data(path, rows):
    with open(path, "w") as f:
        f.write("deaths,py,age,sex\n")
        for r in rows:
            f.write("%d,%r,%r,%s\n" % r)


def simulate(n, seed):
    """Invented rates by age (half years, so many ties) and sex."""
    rng = random.Random(seed)
    rows = []
    for _ in range(n):
        age = rng.randrange(40, 180) / 2.0
        sex = rng.choice("FM")
        py = round(rng.uniform(20, 400), 1)
        rate = 2e-4 * 2.718281828 ** (0.045 * (age - 20) - 0.0003 * (age - 55) ** 2 + (0.3 if sex == "M" else 0))
        lam, k, p, limit = py * rate, 0, 1.0, 2.718281828 ** (-py * rate)
        while True:  # a Poisson draw
            p *= rng.random()
            if p <= limit:
                break
            k += 1
        rows.append((k, py, age, sex))
    return rows


def millrace_fit(data, spline, extra, out):
    cmd = [MILLRACE, "fit", "--quiet", "--outcome", "deaths", "--family", "poisson", "--exposure", "py",
           "--spline", spline, "--tolerance", "1e-13", "--json", out] + extra + [data]
    subprocess.run(cmd, check=True, stdout=subprocess.DEVNULL)
    with open(out) as f:
        return json.load(f)


def r_fit(data, ns_args, with_sex):
    formula = "deaths ~ splines::ns(age, %s) %s sex" % (ns_args, "*" if with_sex else "+")
    code = ("d <- read.csv('%s'); m <- glm(%s, family=poisson, offset=log(py), data=d, "
            "control=glm.control(epsilon=1e-14, maxit=100)); "
            "cat(sprintf('%%.17g %%.17g', coef(m), sqrt(diag(vcov(m)))), sep='\\n'); "
            "cat('knots', sprintf('%%.17g', attr(splines::ns(d$age, %s), 'knots')), '\\n')"
            % (data, formula, ns_args))
    lines = r_eval(code).splitlines()
    coefs = [tuple(float(v) for v in l.split()) for l in lines if not l.startswith("knots")]
    knots = [float(v) for l in lines if l.startswith("knots") for v in l.split()[1:]]
    return coefs, knots


def fit_case(data, spline, ns_args, with_sex, collapsed):
    with tempfile.TemporaryDirectory() as tmp:
        extra = ["--factor", "sex"] + (["--interact", "age sex"] if with_sex else [])
        if not collapsed:
            extra.append("--no-collapse")
        fit = millrace_fit(data, spline, extra, os.path.join(tmp, "fit.json"))
    want, r_knots = r_fit(data, ns_args, with_sex)
    problems = []
    term = fit["model"]["terms"][0]
    if term["kind"] != "spline":
        problems.append("term kind %r" % term["kind"])
    if term["spline"]["knots"] != r_knots:
        problems.append("knots %r, R %r" % (term["spline"]["knots"], r_knots))
    got = [(c["estimate"], c["standard_error"]) for c in fit["coefficients"]]
    if len(got) != len(want):
        problems.append("%d coefficients, R %d" % (len(got), len(want)))
    se_tol = COLLAPSED_TOL if collapsed else REL_TOL
    for c, (g, w) in zip(fit["coefficients"], zip(got, want)):
        if abs(g[0] - w[0]) > REL_TOL * abs(w[0]) + 1e-10:
            problems.append("%s: estimate %r, R %r" % (c["name"], g[0], w[0]))
        if abs(g[1] - w[1]) > se_tol * abs(w[1]):
            problems.append("%s: std error %r, R %r" % (c["name"], g[1], w[1]))
    return problems[:5]


def centred_case(data):
    """A spline times a numeric, gaussian: the numeric is centred and scaled
    inside and mapped back (design.h); R fits the raw columns."""
    with tempfile.TemporaryDirectory() as tmp:
        out = os.path.join(tmp, "fit.json")
        subprocess.run([MILLRACE, "fit", "--quiet", "--outcome", "deaths", "--spline", "age knots=40,60 boundary=25,80",
                        "--numeric", "py", "--interact", "age py", "--json", out, data],
                       check=True, stdout=subprocess.DEVNULL)
        with open(out) as f:
            fit = json.load(f)
    code = ("d <- read.csv('%s'); m <- glm(deaths ~ splines::ns(age, knots=c(40,60), Boundary.knots=c(25,80)) * py, "
            "data=d); cat(sprintf('%%.17g %%.17g', coef(m), sqrt(diag(vcov(m)))), sep='\\n')" % data)
    want = [tuple(float(v) for v in l.split()) for l in r_eval(code).splitlines()]
    problems = []
    for c, w in zip(fit["coefficients"], want):
        if abs(c["estimate"] - w[0]) > REL_TOL * abs(w[0]) + 1e-12:
            problems.append("%s: estimate %r, R %r" % (c["name"], c["estimate"], w[0]))
        if abs(c["standard_error"] - w[1]) > REL_TOL * abs(w[1]):
            problems.append("%s: std error %r, R %r" % (c["name"], c["standard_error"], w[1]))
    if len(want) != len(fit["coefficients"]):
        problems.append("%d coefficients, R %d" % (len(fit["coefficients"]), len(want)))
    return problems[:5]


def main():
    if not os.path.exists(RSCRIPT):
        print("skipped: %s not installed (Debian r-base-core)" % RSCRIPT)
        print("0 passed, 0 failed")
        return 0
    with tempfile.TemporaryDirectory() as tmp:
        data = os.path.join(tmp, "ages.csv")
        write_data(data, simulate(4000, 11))
        checks = [
            ("basis three knots", lambda: basis_case(
                [30.0, 45.0, 60.0], [15.0, 85.0], [-5, 0, 15, 15.5, 22.25, 30, 37.7, 45, 52.1, 60, 71, 84.999, 85, 99, 1e3])),
            ("basis no interior knot", lambda: basis_case([], [1.0, 3.0], [0, 1, 1.5, 2.5, 3, 4])),
            ("basis uneven knots", lambda: basis_case(
                [1990.25, 1991.0, 2003.5, 2019.0], [1985.0, 2024.0], [1970 + 0.37 * i for i in range(160)])),
            ("basis one knot, narrow", lambda: basis_case(
                [1e-3], [-2e-3, 1e-2], [-3e-3 + 1e-4 * i for i in range(150)])),
            ("fit df=4", lambda: fit_case(data, "age df=4", "df=4", False, False)),
            ("fit df=6 times sex", lambda: fit_case(data, "age df=6", "df=6", True, False)),
            ("fit knots, boundary inside the data (straight ends), times sex", lambda: fit_case(
                data, "age knots=35,55,70 boundary=30,80", "knots=c(35,55,70), Boundary.knots=c(30,80)", True, False)),
            ("fit df=4, collapsed patterns", lambda: fit_case(data, "age df=4", "df=4", False, True)),
            ("fit gaussian, spline times a centred numeric", lambda: centred_case(data)),
        ]
        rc = run_checks(checks)
    if isinstance(rc, tuple):  # (passed, failed): the count is the caller's to print
        print("%d passed, %d failed" % rc)
        rc = 1 if rc[1] else 0
    return rc


if __name__ == "__main__":
    sys.exit(main())
