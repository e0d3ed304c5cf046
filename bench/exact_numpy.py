#!/usr/bin/python3
"""What a user would write instead of alphaledger's exact evaluation: a vectorised NumPy loop.

For every test it gathers gamma from a table computed once, at the lags of every past rejection,
and takes the dot product with the deposits (LORD++, Ramdas et al. 2017; SAFFRON, Ramdas et al.
2018, both in the form docs/rules.md gives). This is the fastest plain-NumPy way we know to get
exact levels: no Python loop over the deposits, only one over the tests.

Usage: exact_numpy.py STREAM_FILE [--rules lord++,saffron] [--levels LEVELS_FILE]
  STREAM_FILE: p-values as little-endian float64 (evaluation_bench --write-stream)
  LEVELS_FILE: alphaledger's LORD++ exact levels (evaluation_bench --write-levels); the largest
               relative difference to them is printed (NumPy's dot sums in another order).
Prints "result" lines of key=value pairs, as evaluation_bench does.
"""
import sys
import time

import numpy as np

ALPHA = 0.05
JM_C = 0.079081966722  # the JM constant alphaledger uses (include/alphaledger/spending.hpp)


def jm_table(n):
    """gamma_1..gamma_n of the JM sequence: C log(max(j,2)) / (j exp(sqrt(log j)))."""
    j = np.arange(1, n + 1, dtype=np.float64)
    return JM_C * np.log(np.maximum(j, 2.0)) / (j * np.exp(np.sqrt(np.log(j))))


def zeta(s, n=100000):
    """Riemann zeta by direct summation plus an Euler-Maclaurin tail (from memory)."""
    j = np.arange(1, n, dtype=np.float64)
    head = np.sum(j ** -s)
    return head + n ** (1 - s) / (s - 1) + 0.5 * n ** -s + s * n ** (-s - 1) / 12


def power_table(n, s=1.6):
    j = np.arange(1, n + 1, dtype=np.float64)
    return j ** -s / zeta(s)


def lord_plus_plus(p, w0=ALPHA / 2):
    n = len(p)
    gamma = jm_table(n + 1)
    deposit = np.zeros(n + 1, dtype=np.int64)  # clock of each deposit; index 0 is W0
    coef = np.zeros(n + 1)
    coef[0] = w0
    count = 1
    levels = np.empty(n)
    for t in range(n):  # the clock is t: every test ticks
        level = coef[:count] @ gamma[t - deposit[:count]]
        levels[t] = level
        if p[t] <= level:
            deposit[count] = t + 1
            coef[count] = ALPHA - w0 if count == 1 else ALPHA
            count += 1
    return levels, count - 1


def saffron(p, w0=ALPHA / 2, lam=0.5):
    n = len(p)
    gamma = power_table(n + 1)
    deposit = np.zeros(n + 1, dtype=np.int64)
    coef = np.zeros(n + 1)
    coef[0] = w0
    count = 1
    clock = 0
    levels = np.empty(n)
    for t in range(n):
        level = min(lam, (1 - lam) * (coef[:count] @ gamma[clock - deposit[:count]]))
        levels[t] = level
        if p[t] > lam:  # only non-candidates tick
            clock += 1
        if p[t] <= level:
            deposit[count] = clock
            coef[count] = ALPHA - w0 if count == 1 else ALPHA
            count += 1
    return levels, count - 1


def main():
    args = sys.argv[1:]
    if not args:
        print(__doc__, file=sys.stderr)
        return 2
    stream = np.fromfile(args[0], dtype="<f8")
    rules = ["lord++"]
    levels_file = None
    i = 1
    while i + 1 < len(args):
        if args[i] == "--rules":
            rules = args[i + 1].split(",")
        elif args[i] == "--levels":
            levels_file = args[i + 1]
        i += 2
    for rule in rules:
        cpu = time.process_time()
        wall = time.perf_counter()
        levels, rejections = (lord_plus_plus if rule == "lord++" else saffron)(stream)
        cpu = time.process_time() - cpu
        wall = time.perf_counter() - wall
        line = (f"result rule={rule} mode=numpy tests={len(stream)} rejections={rejections} "
                f"cpu_seconds={cpu:.4f} wall_seconds={wall:.4f} numpy={np.__version__}")
        if levels_file and rule == "lord++":
            ours = np.fromfile(levels_file, dtype="<f8")
            if len(ours) == len(levels):
                rel = np.max(np.abs(levels - ours) / ours)
                line += f" max_rel_diff_to_alphaledger={rel:.3g}"
        print(line, flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
