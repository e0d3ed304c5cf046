#!/usr/bin/python3
"""Reference values for the simulate checks (tests/harness/test_simulate*.cpp), from SciPy
(scipy.stats, scipy.special) as shipped in Debian's python3-scipy.

Run from the repository root with Debian's Python (the one that has SciPy):
    /usr/bin/python3 tests/data/make_simulate_reference.py
Writes tests/data/simulate_scipy.csv: name,value,what. Numbers are written with 17 significant digits.

What is computed, and why it is exact for the simulated model (docs/simulate.md):
- ks_critical_*: the upper 0.001 quantile of the exact Kolmogorov-Smirnov statistic D_n for n draws
  (scipy.stats.kstwo.isf), used to test the generator's normals and p-values against their CDFs.
- spending_global_null_fwer / lond_global_null_fwer: with every test null and p-values independent
  uniform, a rule whose level before its first rejection is a fixed a_t rejects at least once with
  probability 1 - prod_t (1 - a_t) (independent events). alpha-spending: a_t = alpha t^-1.6 / zeta(1.6);
  LOND: a_t = alpha gamma^JM_t (before any discovery LOND's level is beta_t).
- spending_power_*: alpha-spending rejects a non-null test at t with probability
  P(Z > isf(a_t)) where Z ~ Normal(effect, 1 + effect_sd^2), i.e. norm.sf((norm.isf(a_t) - effect)
  / sqrt(1 + effect_sd^2)). Non-null positions are exchangeable, so the mean share of non-nulls
  rejected (over streams with at least one non-null) is the average of that over t = 1..T.
"""
import csv
import math
import sys

import numpy
import scipy
from scipy import special, stats

OUT = "tests/data/simulate_scipy.csv"
ALPHA = 0.05
T = 1000
JM_C = 0.079081966722  # docs/methods.md section 13


def num(x):
    return f"{float(x):.17g}"


def power16(t):
    return t ** -1.6 / special.zeta(1.6, 1)


def jm(t):
    return JM_C * math.log(max(t, 2)) / (t * math.exp(math.sqrt(math.log(t))))


def global_null_fwer(levels):
    return -numpy.expm1(numpy.sum(numpy.log1p(-numpy.asarray(levels))))


def spending_power(effect, effect_sd):
    scale = math.sqrt(1.0 + effect_sd ** 2)
    levels = [ALPHA * power16(t) for t in range(1, T + 1)]
    return float(numpy.mean([stats.norm.sf((stats.norm.isf(a) - effect) / scale) for a in levels]))


rows = [
    ("ks_critical_1000000", stats.kstwo.isf(0.001, 1000000), "scipy.stats.kstwo.isf(0.001, 1000000)"),
    ("ks_critical_20000", stats.kstwo.isf(0.001, 20000), "scipy.stats.kstwo.isf(0.001, 20000)"),
    ("spending_global_null_fwer", global_null_fwer([ALPHA * power16(t) for t in range(1, T + 1)]),
     "1 - prod_{t<=1000} (1 - 0.05 t^-1.6 / scipy.special.zeta(1.6, 1))"),
    ("lond_global_null_fwer", global_null_fwer([ALPHA * jm(t) for t in range(1, T + 1)]),
     "1 - prod_{t<=1000} (1 - 0.05 gamma^JM_t), C = 0.079081966722"),
    ("spending_power_effect3", spending_power(3.0, 0.0),
     "mean_{t<=1000} norm.sf(norm.isf(0.05 t^-1.6 / zeta(1.6)) - 3)"),
    ("spending_power_effect2_sd1", spending_power(2.0, 1.0),
     "mean_{t<=1000} norm.sf((norm.isf(0.05 t^-1.6 / zeta(1.6)) - 2) / sqrt(2))"),
]

with open(OUT, "w", newline="") as f:
    f.write(f"# produced by tests/data/make_simulate_reference.py with Python {sys.version.split()[0]}, "
            f"SciPy {scipy.__version__}, NumPy {numpy.__version__}\n")
    w = csv.writer(f, lineterminator="\n")
    w.writerow(["name", "value", "what"])
    for name, value, what in rows:
        w.writerow([name, num(value), what])
print(f"wrote {OUT}")
