#!/usr/bin/python3
"""Checks the coefficients millrace marks not estimable for cells of two and
three interacting factors whose outcomes are all 0 (poisson) or all at the
maximum (binomial with trials):
  reference: base R (Debian r-base-core, /usr/bin/Rscript) glm of the same
             model (every lower-order term, treatment coding, R's default
             control): the coefficients whose standard error is over 100
             times the largest of the others' are those heading to
             infinity (R stops on its deviance rule with estimates of about
             +-20 and standard errors in the thousands; it gives no
             warning).  millrace's not-estimable marks must be exactly
             that set (less one millrace left aliased: see below), and every other coefficient must agree with R's to
             1e-6 relative (estimate) and 1e-5 (standard error): the
             ordinary coefficients are finite and both fits reach them.
Data constructed here with a fixed seed: 100 rows a cell, one cell empty.
Prints "ok <case>" or "FAIL <case>: <details>" and "N passed, M failed";
exits 1 if anything failed.  Skipped, saying so, without Rscript.
"""
import json
import os
import random
import shutil
import subprocess
import sys
import tempfile

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
MILLRACE = os.path.join(ROOT, "build", "millrace")
RSCRIPT = "/usr/bin/Rscript"

R_PROGRAM = r"""
args <- commandArgs(TRUE)
d <- read.csv(args[1], stringsAsFactors = FALSE)
for (v in c("site", "grp", "sex")) d[[v]] <- factor(d[[v]])
f <- as.formula(args[3])
m <- glm(f, family = if (args[4] == "poisson") poisson() else binomial(), data = d)
s <- summary(m)$coefficients
out <- file(args[2], "w")
for (k in seq_len(nrow(s))) writeLines(sprintf("%s\t%.17g\t%.17g", rownames(s)[k], s[k, 1], s[k, 2]), out)
close(out)
"""

failures = []
passed = 0


def report(case, problems):
    global passed
    if problems:
        failures.append(case)
        print("FAIL %s: %s" % (case, "; ".join(problems[:5])))
    else:
        passed += 1
        print("ok %s" % case)


def make_data(path, empty, family):
    """site x grp x sex, 100 rows a cell; the cell `empty` (a tuple of
    levels, matched on its first len(empty) factors) has every count 0
    (poisson) or every trial a success (binomial)."""
    rnd = random.Random(5)
    rows = ["y,n,site,grp,sex"]
    for i in range(2400):
        site, grp, sex = "S%d" % (i % 4), "G%d" % (i % 3), "FM"[(i // 12) % 2]
        n = 1 + i % 5
        hit = (site, grp, sex)[:len(empty)] == empty
        if family == "poisson":
            y = 0 if hit else rnd.randint(1, 4)
        else:
            y = n if hit else rnd.randint(0, n)
        rows.append("%d,%d,%s,%s,%s" % (y, n, site, grp, sex))
    with open(path, "w") as f:
        f.write("\n".join(rows) + "\n")


def r_name(name):
    """millrace's coefficient name as R's: site=S1 & grp=G2 -> siteS1:grpG2."""
    if name == "intercept":
        return "(Intercept)"
    return ":".join(part.replace("=", "") for part in name.split(" & "))


def case(tmp, name, family, empty, interactions, r_formula):
    data = os.path.join(tmp, name + ".csv")
    make_data(data, empty, family)
    lines = ["outcome y", "family " + family, "factor site", "factor grp", "factor sex"]
    lines += ["interact " + t for t in interactions]
    if family == "binomial":
        lines.append("trials n")
    model = os.path.join(tmp, name + ".model")
    with open(model, "w") as f:
        f.write("\n".join(lines) + "\n")
    out = os.path.join(tmp, name + ".json")
    run = subprocess.run([MILLRACE, "fit", "--quiet", "-m", model, "--json", out, data], capture_output=True, text=True)
    if run.returncode != 0:
        return report(name, ["millrace exit %d: %s" % (run.returncode, run.stderr[-300:])])
    rout = os.path.join(tmp, name + ".r")
    if family == "binomial":
        r_formula = "cbind(y, n - y) ~" + r_formula.split("~", 1)[1]
    run = subprocess.run([RSCRIPT, "-e", R_PROGRAM, data, rout, r_formula, family], capture_output=True, text=True)
    if run.returncode != 0:
        return report(name, ["Rscript exit %d: %s" % (run.returncode, run.stderr[-300:])])
    r = {}
    for line in open(rout):
        k, est, se = line.rstrip("\n").split("\t")
        r[k] = (float(est), float(se))
    coefs = json.load(open(out))["coefficients"]
    ses = sorted(se for _, se in r.values())
    # the largest ordinary SE: every SE below 100x the smallest (none here
    # is 10x another), the runaway ones above it
    ordinary = max(se for se in ses if se < 100 * ses[0])
    runaway = set(k for k, (_, se) in r.items() if se > 100 * ordinary)
    marked = set(r_name(c["name"]) for c in coefs if c["not_estimable"])
    # at the boundary the weights of the empty cell vanish, and the last of
    # the columns that run off can fall below the aliasing threshold in
    # X'WX: aliased, it has no estimate to mark, but it must be one of R's
    aliased = set(r_name(c["name"]) for c in coefs if c["aliased"])
    problems = []
    if not runaway:
        problems.append("R shows no runaway coefficient")
    if marked != runaway - aliased or not aliased <= runaway:
        problems.append("marked %r, aliased %r, R's runaway %r" % (sorted(marked), sorted(aliased), sorted(runaway)))
    for c in coefs:
        k = r_name(c["name"])
        if k in runaway or c["aliased"]:
            continue
        est, se = r[k]
        if abs(c["estimate"] - est) > 1e-6 * max(abs(est), se):
            problems.append("%s estimate %.10g, R %.10g" % (k, c["estimate"], est))
        if abs(c["standard_error"] - se) > 1e-5 * se:
            problems.append("%s SE %.10g, R %.10g" % (k, c["standard_error"], se))
    report(name, problems)


def main():
    if not os.path.exists(RSCRIPT):
        print("skipped: no %s" % RSCRIPT)
        return 0
    three = ["site grp", "site sex", "grp sex", "site grp sex"]
    with tempfile.TemporaryDirectory() as tmp:
        case(tmp, "poisson_triple", "poisson", ("S1", "G2", "M"), three, "y ~ site * grp * sex")
        case(tmp, "poisson_triple_reference", "poisson", ("S0", "G2", "M"), three, "y ~ site * grp * sex")
        case(tmp, "binomial_triple_successes", "binomial", ("S2", "G1", "F"), three, "y ~ site * grp * sex")
        case(tmp, "poisson_pair_reference", "poisson", ("S0", "G2"), ["site grp"], "y ~ site * grp + sex")
    print("%d passed, %d failed" % (passed, len(failures)))
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
