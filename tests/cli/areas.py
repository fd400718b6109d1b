"""Rows of a Poisson rate model over many small areas, for the tests of a
factor declared `many`: area A<n> has a random effect (normal, sd 0.5);
age, sex and person-years (py) are drawn per row; counts are Poisson
(inverse transform).  The first LEVELS rows visit each area once, so every
level is met.  Invented data.

usage: areas.py OUT ROWS LEVELS SEED"""
import math
import random
import sys


def main():
    out, rows, levels, seed = sys.argv[1], int(sys.argv[2]), int(sys.argv[3]), int(sys.argv[4])
    random.seed(seed)
    eff = [random.gauss(0, 0.5) for _ in range(levels)]
    with open(out, "w") as f:
        f.write("y,area,age,sex,py\n")
        for i in range(rows):
            a = i if i < levels else random.randrange(levels)
            age = random.uniform(20, 80); sex = random.choice("MF"); py = random.uniform(100, 1000)
            mu = py * math.exp(-6 + eff[a] + 0.02 * (age - 50) + (0.3 if sex == "M" else 0))
            k, p = 0, math.exp(-mu); s, u = p, random.random()
            while u > s:
                k += 1; p *= mu / k; s += p
            f.write("%d,A%05d,%.3f,%s,%.2f\n" % (k, a, age, sex, py))


if __name__ == "__main__":
    main()
