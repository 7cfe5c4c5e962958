#!/usr/bin/python3
"""Independent computation of the CJS goodness-of-fit component tables.

Reads a history file (capture history string, loss-on-capture flag),
builds the TEST 3.SR, 3.SM, 2.CT and 2.CL tables (Burnham et al. 1987;
Pradel, Gimenez & Lebreton 2005) with its own code, pools sparse columns
(later into earlier until the smaller expected count of a column group is at
least 2, a short remainder joining the last group), and tests each table
with scipy.stats.chi2_contingency (Pearson, no continuity correction) or,
for a 2x2 table with an expected count below 2, scipy.stats.fisher_exact
(two-sided) with the 1-df chi-square of equal upper tail from
scipy.stats.chi2.isf.

Run with Debian's python3-scipy:
    /usr/bin/python3 gof_scipy.py gof_histories.csv > gof_scipy_output.csv
    /usr/bin/python3 gof_scipy.py gof_histories_small.csv > gof_scipy_output_small.csv
"""
import csv
import os
import sys

import numpy as np
from scipy.stats import chi2, chi2_contingency, fisher_exact

MIN_EXPECTED = 2.0
HERE = os.path.dirname(os.path.abspath(__file__))


def load(name):
    rows = []
    with open(os.path.join(HERE, name)) as f:
        for rec in csv.DictReader(f):
            caught = np.array([c == "1" for c in rec["history"]])
            rows.append((caught, rec["removed"] == "1"))
    return rows


def describe(caught, removed):
    idx = np.flatnonzero(caught)
    return idx[0], idx[-1], removed


def next_after(caught, i):
    later = np.flatnonzero(caught[i + 1:])
    return i + 1 + later[0] if len(later) else -1


def pool(table):
    rows = table.sum(axis=1)
    n = table.sum()
    groups, cur, tot = [], [], 0
    for j in range(table.shape[1]):
        cur.append(j)
        tot += table[:, j].sum()
        if tot * rows.min() / n >= MIN_EXPECTED:
            groups.append(cur)
            cur, tot = [], 0
    if cur:
        if groups:
            groups[-1].extend(cur)
        else:
            groups.append(cur)
    return np.array([[table[r, g].sum() for g in groups] for r in range(2)])


def test(name, occ, table, do_pool):
    table = np.array(table)
    rows = table.sum(axis=1)
    pooled = table
    tested, fisher, df, x2, p = 0, 0, 0, 0.0, 1.0
    if rows.min() > 0:
        pooled = pool(table) if do_pool else table
        if pooled.shape[1] >= 2 and pooled.sum(axis=0).min() > 0:
            tested = 1
            stat, pv, dof, expected = chi2_contingency(pooled, correction=False)
            df = int(dof)
            if pooled.shape[1] == 2 and expected.min() < MIN_EXPECTED:
                fisher = 1
                p = fisher_exact(pooled)[1]
                p = min(1.0, p)
                x2 = 0.0 if p >= 1 else chi2.isf(p, 1)
            else:
                x2, p = stat, pv
    text = "|".join(" ".join(str(v) for v in r) for r in pooled)
    print(f"{name},{occ},{tested},{fisher},{df},{x2!r},{p!r},{text}")


def main():
    name = sys.argv[1] if len(sys.argv) > 1 else "gof_histories.csv"
    animals = [(c, *describe(c, r)) for c, r in load(name)]
    k = len(animals[0][0])
    print("test,occasion,tested,fisher,df,chi_square,p,pooled")
    out = {"TEST 3.SR": [], "TEST 3.SM": [], "TEST 2.CT": [], "TEST 2.CL": []}
    for i in range(1, k - 1):
        released = [(c, f, l) for c, f, l, rem in animals if c[i] and not (rem and l == i)]
        sr = np.zeros((2, 2), int)
        sm = np.zeros((2, k - i - 1), int)
        for c, f, l in released:
            r = 1 if f == i else 0
            nxt = next_after(c, i)
            sr[r, 0 if nxt >= 0 else 1] += 1
            if nxt >= 0:
                sm[r, nxt - i - 1] += 1
        out["TEST 3.SR"].append((i + 1, sr, False))
        if i <= k - 3:
            out["TEST 3.SM"].append((i + 1, sm, True))
            ct = np.zeros((2, 2), int)
            cl = np.zeros((2, max(k - i - 2, 0)), int)
            for c, f, l, rem in animals:
                if f > i:
                    continue
                nxt = next_after(c, i)
                if nxt < 0:
                    continue
                r = 0 if c[i] else 1
                ct[r, 0 if nxt == i + 1 else 1] += 1
                if nxt >= i + 2:
                    cl[r, nxt - i - 2] += 1
            out["TEST 2.CT"].append((i + 1, ct, False))
            if i <= k - 4:
                out["TEST 2.CL"].append((i + 1, cl, True))
    for name in ["TEST 3.SR", "TEST 3.SM", "TEST 2.CT", "TEST 2.CL"]:
        for occ, table, do_pool in out[name]:
            test(name, occ, table, do_pool)


if __name__ == "__main__":
    main()
