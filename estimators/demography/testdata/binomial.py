#!/usr/bin/python3
"""Independent reference values for the demography tests, computed with
Debian's python3-scipy (scipy.stats.binomtest, its exact Clopper-Pearson
interval and two-sided p-value) and Python's statistics module. Run with
/usr/bin/python3 from this directory; it writes binomial.csv and mass.csv,
which are committed. The Go tests never run Python."""
import csv
import statistics

import scipy
from scipy.stats import binomtest

cases = [
    (0, 10, 0.5), (1, 10, 0.5), (5, 10, 0.5), (10, 10, 0.5), (7, 20, 0.5),
    (31, 50, 0.5), (48, 75, 0.5), (120, 200, 0.5), (3, 4, 0.5), (1, 1, 0.5),
    (530, 1000, 0.5), (3, 20, 0.3), (12, 20, 0.3), (0, 5, 0.1), (40, 60, 0.55),
]
with open("binomial.csv", "w", newline="") as f:
    w = csv.writer(f)
    w.writerow(["x", "n", "p0", "ci_low", "ci_high", "p_two_sided", "scipy"])
    for x, n, p0 in cases:
        r = binomtest(x, n, p0, alternative="two-sided")
        ci = binomtest(x, n).proportion_ci(confidence_level=0.95, method="exact")
        w.writerow([x, n, p0, repr(ci.low), repr(ci.high), repr(r.pvalue), scipy.__version__])

# Masses (g) of an invented catch of voles on the fictional Larchmere
# grid, by sex and age; one mass per animal.
masses = [
    ("F", "adult", [31.5, 29.0, 33.2, 30.8, 35.1, 28.4]),
    ("F", "juvenile", [14.2, 16.8, 15.5]),
    ("M", "adult", [34.0, 36.5, 32.9, 38.2, 35.7]),
    ("M", "juvenile", [17.1]),
    ("", "adult", [30.0, 31.0]),
    # Large mean, small spread: checks the one-pass variance's accuracy.
    ("M", "subadult", [100000.1, 100000.2, 100000.3, 100000.4]),
]
with open("mass.csv", "w", newline="") as f:
    w = csv.writer(f)
    w.writerow(["sex", "age", "masses", "n", "mean", "sd"])
    for sex, age, xs in masses:
        sd = repr(statistics.stdev(xs)) if len(xs) > 1 else ""
        w.writerow([sex, age, " ".join(map(repr, xs)), len(xs), repr(statistics.fmean(xs)), sd])
