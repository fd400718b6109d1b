#!/usr/bin/env python3
"""rates_data.py N SEED NEWSHARE: N rows of invented Poisson counts with an
exposure, a factor zone (Z01..Z08; a share NEWSHARE of rows in a new zone
Z00, which sorts first and so becomes the reference), sex, year and dose.
Seeded: the same arguments give the same bytes.  No real data."""
import math
import random
import sys
n, seed, newfrac = int(sys.argv[1]), int(sys.argv[2]), float(sys.argv[3])
rnd = random.Random(seed)
def poisson(mu):
    L, k, p = math.exp(-mu), 0, 1.0
    while True:
        p *= rnd.random()
        if p <= L: return k
        k += 1
zones = ["Z%02d" % i for i in range(1, 9)]
eff = {z: 0.1 * i for i, z in enumerate(zones)}
eff["Z00"] = -0.3
print("count,zone,sex,year,dose,exposure")
for i in range(n):
    z = "Z00" if rnd.random() < newfrac else rnd.choice(zones)
    s = rnd.choice("FM"); y = rnd.randint(2010, 2024); d = round(rnd.uniform(0, 20), 1)
    e = round(rnd.uniform(0.2, 2.0), 2)
    mu = e * math.exp(-2 + eff[z] + (0.3 if s == "M" else 0) + 0.02 * (y - 2017) + 0.03 * d)
    print("%d,%s,%s,%d,%s,%s" % (poisson(mu), z, s, y, d, e))
