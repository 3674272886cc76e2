"""Invented benchmark data for `fit --effects` (docs/benchmarks.md): 1,000,000 patients of a
fictional two-arm trial ("north", "south"), one continuous covariate (age, years).

Weibull times (shape 1.3, scale 20 months) with hazard ratio 0.75 for north and 1.02 per year
of age above 62; censoring uniform on 6-48 months. Seeded, so the file is the same every run.

Run: python3 scripts/make_effects_benchmark_data.py OUT.csv
"""

import sys

import numpy as np

rng = np.random.default_rng(20261204)
n = 1_000_000
arm = rng.integers(0, 2, n)
age = rng.normal(62, 9, n).round(1)
lp = np.log(0.75) * arm + 0.02 * (age - 62)
t = 20 * (-np.log(rng.random(n)) / np.exp(lp)) ** (1 / 1.3)
c = rng.uniform(6, 48, n)
time = np.minimum(t, c).round(3)
time[time <= 0] = 0.001
event = (t <= c).astype(int)
names = np.where(arm == 1, "north", "south")
with open(sys.argv[1], "w") as f:
    f.write("time,event,arm,age\n")
    f.write("\n".join(f"{a},{b},{c},{d}" for a, b, c, d in zip(time, event, names, age)))
    f.write("\n")
