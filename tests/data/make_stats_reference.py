#!/usr/bin/python3
"""Reference values for the experiment statistics (tests/core/test_stats_reference.cpp), from
SciPy (scipy.stats) as shipped in Debian's python3-scipy. Each row keeps the exact SciPy call that
produced it (the call text is what is evaluated), and each file starts with the versions used.

Run from the repository root with Debian's Python (the one that has SciPy):
    /usr/bin/python3 tests/data/make_stats_reference.py
Writes tests/data/stats_scipy_*.csv. Numbers are written with 17 significant digits.
"""
import csv
import sys

import numpy
import scipy
from scipy import stats  # noqa: F401  (used by the evaluated calls)
from math import sqrt  # noqa: F401

OUT = "tests/data"
VERSIONS = (f"# produced by tests/data/make_stats_reference.py with Python {sys.version.split()[0]}, "
            f"SciPy {scipy.__version__}, NumPy {numpy.__version__}")


def num(x):
    return repr(float(x)) if abs(float(x)) != float("inf") else ("inf" if x > 0 else "-inf")


def write(name, what, header, rows):
    path = f"{OUT}/{name}"
    with open(path, "w", newline="") as f:
        f.write(VERSIONS + "\n")
        f.write(f"# {what}\n")
        w = csv.writer(f, lineterminator="\n")
        w.writerow(header)
        w.writerows(rows)
    print("wrote", path)


ALTS = ["two-sided", "greater", "less"]

# ---- two means from summaries: ttest_ind_from_stats (treatment first, so greater = treatment larger)
t_cases = [  # control n, mean, sd, treatment n, mean, sd
    (10, 5.0, 2.0, 12, 6.5, 3.0), (30, 100.0, 15.0, 25, 92.0, 10.0), (2, 0.0, 1.0, 3, 1.5, 0.5),
    (200, 3.2, 0.8, 180, 3.35, 0.9), (5, -4.0, 1.0, 40, -3.0, 6.0), (1000, 20.0, 40.0, 1000, 23.5, 45.0),
    (200, 0.0, 1.0, 200, 11.2, 1.0),  # t = 112 on 398 df: p-value below 1e-300
    (3, 1.0, 1e-3, 3, 1.0001, 2e-3),
]
rows = []
for k, (n0, m0, s0, n1, m1, s1) in enumerate(t_cases, 1):
    for equal_var in (False, True):
        for alt in ALTS:
            call = (f"stats.ttest_ind_from_stats(mean1={m1!r}, std1={s1!r}, nobs1={n1}, mean2={m0!r}, std2={s0!r}, "
                    f"nobs2={n0}, equal_var={equal_var}, alternative='{alt}')")
            r = eval(call)
            rows.append([k, n0, repr(m0), repr(s0), n1, repr(m1), repr(s1), int(equal_var), alt,
                         num(r.statistic), num(r.pvalue), call])
write("stats_scipy_ttest.csv", "two means: scipy.stats.ttest_ind_from_stats (equal_var False = Welch, True = pooled)",
      ["case", "control_n", "control_mean", "control_sd", "treatment_n", "treatment_mean", "treatment_sd",
       "var_equal", "alternative", "statistic", "p_value", "call"], rows)

# ---- Fisher's exact test and the pooled chi-square (= pooled z^2) on the same tables
p_cases = [  # control n, x, treatment n, x
    (12, 0, 10, 5), (20, 3, 20, 9), (50, 3, 60, 9), (1000, 100, 1000, 130), (10, 0, 10, 0), (5, 5, 5, 0),
    (3000, 10, 3000, 60), (40000, 400, 41000, 470), (9, 3, 7, 3), (2000, 3, 2000, 860),
]
rows = []
for k, (n0, x0, n1, x1) in enumerate(p_cases, 1):
    for alt in ALTS:
        call = f"stats.fisher_exact([[{x1}, {n1 - x1}], [{x0}, {n0 - x0}]], alternative='{alt}')"
        r = eval(call)
        rows.append([k, n0, x0, n1, x1, alt, num(r[1]), call])
write("stats_scipy_fisher.csv", "Fisher's exact test: scipy.stats.fisher_exact on [[treatment converted, not], "
      "[control converted, not]]",
      ["case", "control_n", "control_x", "treatment_n", "treatment_x", "alternative", "p_value", "call"], rows)

rows = []
for k, (n0, x0, n1, x1) in enumerate(p_cases, 1):
    if x0 + x1 in (0, n0 + n1):
        continue  # no variation: the chi-square is undefined (0/0)
    call = f"stats.chi2_contingency([[{x1}, {n1 - x1}], [{x0}, {n0 - x0}]], correction=False)"
    r = eval(call)
    rows.append([k, n0, x0, n1, x1, num(r[0]), num(r[1]), call])
write("stats_scipy_chi2.csv", "pooled two-proportion test: scipy.stats.chi2_contingency(correction=False); "
      "chi2 = pooled z^2, p_value two-sided",
      ["case", "control_n", "control_x", "treatment_n", "treatment_x", "chi2", "p_value", "call"], rows)

# ---- distribution values: upper tails, quantiles, and the power of the two-sample t-test
rows = []
for z in (0.0, 1.0, 1.959963984540054, 5.0, 10.0, 20.0, 37.0, 37.5):
    call = f"stats.norm.sf({z!r})"
    rows.append(["normal_upper", repr(z), "", "", "", num(eval(call)), call])
for q in (0.5, 0.025, 0.005, 1e-10, 1e-100, 1e-300):
    call = f"stats.norm.isf({q!r})"
    rows.append(["normal_upper_quantile", repr(q), "", "", "", num(eval(call)), call])
for t, df in ((2.0, 5.0), (1.5, 12.5), (40.0, 3.0), (110.0, 398.0), (-2.5, 30.0), (7.0, 1000.0)):
    call = f"stats.t.sf({t!r}, {df!r})"
    rows.append(["t_upper", repr(t), repr(df), "", "", num(eval(call)), call])
# power of the two-sample t-test with n per arm, effect d, sd, level, sides (1 or 2):
# P(T' > t_{1 - level/sides, 2(n-1)}), T' noncentral t with df 2(n-1) and ncp sqrt(n/2) d / sd
for n, d, sd, level, sides in ((10, 1.0, 1.0, 0.05, 2), (64, 0.5, 1.0, 0.05, 2), (394, 0.2, 1.0, 0.05, 2),
                               (57, 0.5, 2.0, 1e-4, 1), (500, 3.0, 10.0, 0.001, 2), (23, 1.0, 1.0, 0.05, 2)):
    df = 2 * (n - 1)
    call = f"stats.nct.sf(stats.t.isf({level!r} / {sides}, {df}), {df}, sqrt({n} / 2) * {d!r} / {sd!r})"
    rows.append(["means_power", n, repr(d), repr(sd), f"{level!r}/{sides}", num(eval(call)), call])
write("stats_scipy_tails.csv", "distribution values: scipy.stats norm.sf / norm.isf / t.sf, and the two-sample t-test "
      "power through nct.sf (columns a-d: the call's arguments)",
      ["function", "a", "b", "c", "d", "value", "call"], rows)
