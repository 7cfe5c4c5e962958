#!/usr/bin/python3
"""Writes likelihood_histories.csv, the invented capture histories used by
the likelihood-model tests (scipy_likelihood.py and likelihood_test.go).

Invented scenario: a live-trapping grid at the (invented) Marrow Creek
meadow, tag series "MC-", 7 nights. Each animal has a mass (g) and a sex
(male = 1); catchability rises with mass, is higher for males, varies by
night, differs between two hidden classes, and rises slightly after a first
capture. About 1 capture in 60 ends in a loss on capture, after which the
animal is not caught again.

Run once with /usr/bin/python3 likelihood_make_histories.py; the output is
committed and the tests read the committed file.
"""
import numpy as np

rng = np.random.default_rng(20260512)
N, T = 150, 7
night = np.array([0.2, -0.3, 0.0, 0.4, -0.2, 0.1, -0.1])
rows = []
for i in range(N):
    mass = round(float(rng.normal(200, 30)), 1)
    male = int(rng.random() < 0.5)
    shy = rng.random() < 0.4
    seen, lost, hist = False, False, []
    for j in range(T):
        if lost:
            hist.append(0)
            continue
        eta = -1.0 + 0.015 * (mass - 200) + 0.4 * male + night[j] + (-1.2 if shy else 0.0) + (0.3 if seen else 0.0)
        c = rng.random() < 1 / (1 + np.exp(-eta))
        hist.append(int(c))
        if c:
            seen = True
            if rng.random() < 1 / 60:
                lost = True
    if seen:
        rows.append((hist, male, mass, lost))

with open("likelihood_histories.csv", "w") as f:
    f.write("id,history,male,mass,removed\n")
    for k, (hist, male, mass, lost) in enumerate(rows):
        f.write("MC-%03d,%s,%d,%.1f,%d\n" % (k + 1, "".join(map(str, hist)), male, mass, int(lost)))
