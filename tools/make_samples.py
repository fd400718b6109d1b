#!/usr/bin/python3
# tools/make_samples.py - regenerates the invented demo data in samples/.
#
# Everything here is invented: the regions, the people and the rates.  The
# outcomes are drawn from GLMs with the coefficients below, so a fit of the
# sample files can be compared with the truth.  Names are millrace's
# coefficient names for samples/falls.model and samples/screening.model.
#
# falls.csv - admissions ~ Poisson(person_years * exp(eta)), log link;
#   reference levels age_band=40-44, sex=F, region=Brindlemarch (the first
#   region in sorted order and in the file); year numeric, NOT centred, so
#   intercept = -5.99 - 2020 * 0.012 (the log rate for F 40-44
#   Brindlemarch in 2020 is -5.99).
#   intercept              -30.23
#   age_band=00-04   0.30    age_band=00-04 & sex=M   0.25
#   age_band=05-09   0.10    age_band=05-09 & sex=M   0.35
#   age_band=10-14   0.20    age_band=10-14 & sex=M   0.45
#   age_band=15-19   0.10    age_band=15-19 & sex=M   0.55
#   age_band=20-24  -0.05    age_band=20-24 & sex=M   0.50
#   age_band=25-29  -0.20    age_band=25-29 & sex=M   0.40
#   age_band=30-34  -0.20    age_band=30-34 & sex=M   0.30
#   age_band=35-39  -0.10    age_band=35-39 & sex=M   0.15
#   age_band=45-49   0.10    age_band=45-49 & sex=M  -0.05
#   age_band=50-54   0.25    age_band=50-54 & sex=M  -0.15
#   age_band=55-59   0.45    age_band=55-59 & sex=M  -0.25
#   age_band=60-64   0.70    age_band=60-64 & sex=M  -0.30
#   age_band=65-69   1.00    age_band=65-69 & sex=M  -0.35
#   age_band=70-74   1.40    age_band=70-74 & sex=M  -0.40
#   age_band=75-79   1.90    age_band=75-79 & sex=M  -0.40
#   age_band=80-84   2.40    age_band=80-84 & sex=M  -0.35
#   age_band=85+     3.00    age_band=85+ & sex=M    -0.30
#   sex=M           -0.05
#   region=Corvane-Coast 0.12   region=Eastmoor   -0.08
#   region=Highcairn     0.20   region=North-Vale  0.05
#   region=Quarrendale  -0.15   region=Sallowfen   0.28
#   region=Wexhollow    -0.22
#   year             0.012
#
# screening.csv - attended ~ Bernoulli(1 / (1 + exp(-eta))), logit link;
#   reference levels sex=F, smoker=never; age, deprivation, bmi numeric and
#   not centred.  bmi was blanked (empty or "NA") at random after the outcome
#   was drawn from the true bmi, so a complete-case fit recovers these.
#   intercept     0.20
#   age             0.03
#   sex=M          -0.25
#   deprivation    -0.22
#   smoker=current -0.60
#   smoker=former  -0.15
#   bmi            -0.02
#
# Usage: /usr/bin/python3 tools/make_samples.py [--out DIR] [--truth]
#   --truth prints the coefficients above from the constants below, as JSON.
# The zstd copies are made with the zstd command-line tool at level 19.
# Output is reproducible for a given numpy version; the committed files are
# the reference if a later numpy draws differently.

import argparse
import json
import os
import subprocess
import sys

import numpy as np

SEED = 4127

AGE_BANDS = ["%02d-%02d" % (lo, lo + 4) for lo in range(0, 85, 5)] + ["85+"]
SEXES = ["F", "M"]
YEARS = list(range(2015, 2025))
YEAR_CENTRE = 2020

# Invented regions, listed in sorted order so that the first row of the file
# holds the first level of every factor: any rule for choosing a default
# reference level then picks the same one.
REGIONS = ["Brindlemarch", "Corvane-Coast", "Eastmoor", "Highcairn",
           "North-Vale", "Quarrendale", "Sallowfen", "Wexhollow"]
REGION_POPULATION = [310_000, 145_000, 520_000, 95_000,
                     880_000, 230_000, 60_000, 410_000]
REGION_GROWTH = [0.004, -0.003, 0.009, -0.006, 0.012, 0.002, -0.008, 0.006]

# Share of a region's population in each band: a population that is ageing
# slowly, so the 85+ cells are small (hundreds of person-years).
BAND_SHARE = [5.2, 5.6, 5.8, 5.7, 6.0, 6.4, 6.8, 6.7, 6.5,
              6.6, 6.9, 6.8, 6.1, 5.6, 5.2, 3.9, 2.7, 2.4]
# Share of women within each band: more women at the oldest ages.
FEMALE_SHARE = [0.488, 0.487, 0.487, 0.485, 0.49, 0.495, 0.5, 0.502, 0.503,
                0.505, 0.507, 0.51, 0.515, 0.52, 0.53, 0.55, 0.59, 0.66]

FALLS_LOG_RATE_2020 = -5.99  # F, 40-44, Brindlemarch: about 2.5 per 1000 py
FALLS_BAND = dict(zip(AGE_BANDS, [
    0.30, 0.10, 0.20, 0.10, -0.05, -0.20, -0.20, -0.10, 0.00,
    0.10, 0.25, 0.45, 0.70, 1.00, 1.40, 1.90, 2.40, 3.00]))
FALLS_SEX_M = -0.05
# Young men fall (and are admitted) more than young women; old women more
# than old men: the interaction the demo model is there to show.
FALLS_BAND_X_M = dict(zip(AGE_BANDS, [
    0.25, 0.35, 0.45, 0.55, 0.50, 0.40, 0.30, 0.15, 0.00,
    -0.05, -0.15, -0.25, -0.30, -0.35, -0.40, -0.40, -0.35, -0.30]))
FALLS_REGION = dict(zip(REGIONS, [0.00, 0.12, -0.08, 0.20, 0.05, -0.15, 0.28, -0.22]))
FALLS_YEAR = 0.012

SCREENING_ROWS = 4000
SCR_INTERCEPT = 0.20
SCR_AGE = 0.03
SCR_SEX_M = -0.25
SCR_DEPRIVATION = -0.22
SCR_SMOKER = {"never": 0.00, "former": -0.15, "current": -0.60}
SCR_BMI = -0.02
SCR_BMI_EMPTY_SHARE = 0.015
SCR_BMI_NA_SHARE = 0.010


def falls_truth():
    coef = {"intercept": FALLS_LOG_RATE_2020 - YEAR_CENTRE * FALLS_YEAR}
    for band in AGE_BANDS:
        if band != "40-44":
            coef["age_band=" + band] = FALLS_BAND[band]
    coef["sex=M"] = FALLS_SEX_M
    for region in REGIONS[1:]:
        coef["region=" + region] = FALLS_REGION[region]
    coef["year"] = FALLS_YEAR
    for band in AGE_BANDS:
        if band != "40-44":
            coef["age_band=%s & sex=M" % band] = FALLS_BAND_X_M[band]
    return coef


def screening_truth():
    return {"intercept": SCR_INTERCEPT, "age": SCR_AGE, "sex=M": SCR_SEX_M,
            "deprivation": SCR_DEPRIVATION,
            "smoker=current": SCR_SMOKER["current"],
            "smoker=former": SCR_SMOKER["former"], "bmi": SCR_BMI}


def falls_rows(rng):
    total_share = sum(BAND_SHARE)
    for year in YEARS:
        for r, region in enumerate(REGIONS):
            population = REGION_POPULATION[r] * (1 + REGION_GROWTH[r]) ** (year - YEARS[0])
            for sex in SEXES:
                for b, band in enumerate(AGE_BANDS):
                    share = FEMALE_SHARE[b] if sex == "F" else 1 - FEMALE_SHARE[b]
                    # A little cell-level noise so person-years do not look
                    # like a product of round shares.
                    py = population * BAND_SHARE[b] / total_share * share
                    py *= rng.lognormal(0.0, 0.03)
                    py = round(py, 1)
                    eta = (FALLS_LOG_RATE_2020 + FALLS_BAND[band] + FALLS_REGION[region]
                           + FALLS_YEAR * (year - YEAR_CENTRE))
                    if sex == "M":
                        eta += FALLS_SEX_M + FALLS_BAND_X_M[band]
                    admissions = rng.poisson(py * np.exp(eta))
                    yield "%s,%s,%s,%d,%.1f,%d" % (band, sex, region, year, py, admissions)


def screening_person(rng):
    age = int(rng.integers(50, 75))
    sex = "F" if rng.random() < 0.52 else "M"
    deprivation = int(rng.integers(1, 6))
    # Smoking is commoner in the more deprived quintiles, as in most
    # surveys; the model adjusts for both, so the pattern is harmless.
    p_current = 0.08 + 0.035 * deprivation
    p_former = 0.25
    u = rng.random()
    smoker = "current" if u < p_current else "former" if u < p_current + p_former else "never"
    bmi = round(float(np.clip(rng.lognormal(np.log(27.0), 0.16), 16.0, 55.0)), 1)
    eta = (SCR_INTERCEPT + SCR_AGE * age + SCR_DEPRIVATION * deprivation
           + SCR_SMOKER[smoker] + SCR_BMI * bmi + (SCR_SEX_M if sex == "M" else 0.0))
    attended = int(rng.random() < 1.0 / (1.0 + np.exp(-eta)))
    return age, sex, deprivation, smoker, bmi, attended


def screening_rows(rng):
    for pid in range(1, SCREENING_ROWS + 1):
        age, sex, deprivation, smoker, bmi, attended = screening_person(rng)
        u = rng.random()
        if u < SCR_BMI_EMPTY_SHARE:
            bmi_text = ""
        elif u < SCR_BMI_EMPTY_SHARE + SCR_BMI_NA_SHARE:
            bmi_text = "NA"
        else:
            bmi_text = "%.1f" % bmi
        yield "%d,%d,%s,%d,%s,%s,%d" % (pid, age, sex, deprivation, smoker, bmi_text, attended)


def write_csv(path, header, rows):
    with open(path, "w", newline="\n") as out:
        out.write(header + "\n")
        for row in rows:
            out.write(row + "\n")


def compress(path):
    subprocess.run(["zstd", "-19", "-q", "-f", "--no-progress", path, "-o", path + ".zst"],
                   check=True)


def main():
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--out", default=os.path.join(os.path.dirname(__file__), "..", "samples"))
    parser.add_argument("--truth", action="store_true")
    args = parser.parse_args()
    if args.truth:
        json.dump({"falls": falls_truth(), "screening": screening_truth()}, sys.stdout, indent=2)
        print()
        return
    # Separate streams, so that changing one sample leaves the other's bytes
    # alone.
    falls_rng, screening_rng = (np.random.default_rng(s)
                                for s in np.random.SeedSequence(SEED).spawn(2))
    os.makedirs(args.out, exist_ok=True)
    falls = os.path.join(args.out, "falls.csv")
    write_csv(falls, "age_band,sex,region,year,person_years,admissions", falls_rows(falls_rng))
    screening = os.path.join(args.out, "screening.csv")
    write_csv(screening, "id,age,sex,deprivation,smoker,bmi,attended",
              screening_rows(screening_rng))
    for path in (falls, screening):
        compress(path)


if __name__ == "__main__":
    main()
