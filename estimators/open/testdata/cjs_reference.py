#!/usr/bin/python3
"""Independent maximum-likelihood fits of Cormack-Jolly-Seber models with scipy.

This script is the outside reference for cjs_test.go. It shares no code with
the Go package: the likelihood is written out cell by cell from the m-array
(pi_ij as a product of survival and miss probabilities, chi_i as one minus
the sum of the pi_ij), maximised with scipy.optimize.minimize (BFGS, then
Nelder-Mead polish, from several starts), and standard errors come from a
central-difference Hessian on the logit scale.

Run from this directory:

    /usr/bin/python3 cjs_reference.py > cjs_reference.json

It reads dipper-marray.csv and writes groups-marray.csv (an invented
two-group study simulated here with a fixed seed) before fitting both.
"""

import csv
import json
import math
import sys

import numpy as np
from scipy.optimize import minimize
from scipy.special import expit


def read_marray(path):
    rel, rows = [], []
    with open(path) as f:
        rd = csv.reader(f)
        head = next(rd)
        t = len(head) - 2 + 1  # release rows plus the last occasion
        for rec in rd:
            i = int(rec[0]) - 1
            r = int(rec[1])
            m = [0] * t
            for k, cell in enumerate(rec[2:]):
                j = k + 1
                m[j] = int(cell) if cell.strip() else 0
            rel.append(r)
            rows.append(m)
    rel.append(0)
    rows.append([0] * t)
    return rel, rows


def simulate_groups(seed=20261202):
    """Two invented groups ("female", "male"), 6 occasions, cohorts of new
    releases, phi and p differing by group. Returns {name: (R, m)}."""
    rng = np.random.default_rng(seed)
    t = 6
    truth = {"female": (0.70, 0.60), "male": (0.55, 0.45)}
    new = {"female": [80, 70, 70, 70, 60, 0], "male": [80, 70, 70, 70, 60, 0]}
    out = {}
    for g, (phi, p) in truth.items():
        R = [0] * t
        m = [[0] * t for _ in range(t)]
        recaught = [0] * t
        for i in range(t):
            R[i] = new[g][i] + recaught[i]
            if i == t - 1:
                break
            probs = []
            for j in range(i + 1, t):
                probs.append(phi ** (j - i) * (1 - p) ** (j - i - 1) * p)
            probs.append(1 - sum(probs))
            draw = rng.multinomial(R[i], probs)
            for k, j in enumerate(range(i + 1, t)):
                m[i][j] = int(draw[k])
                recaught[j] += int(draw[k])
        R[t - 1] = 0  # not used by the CJS likelihood
        out[g] = (R, m)
    return out


def write_groups(path, data):
    t = len(next(iter(data.values()))[0])
    with open(path, "w", newline="") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(["group", "release_occasion", "R"] + ["m_to_%d" % (j + 1) for j in range(1, t)])
        for g, (R, m) in data.items():
            for i in range(t - 1):
                w.writerow([g, i + 1, R[i]] + [m[i][j] if j > i else "" for j in range(1, t)])


def names_for(struct, base, g, occ):
    name = base
    if struct in ("g", "g*t"):
        name += "(%s)" % g
    if struct in ("t", "g*t"):
        name += "[%d]" % occ
    return name


def build(groups, t, phis, ps):
    """Return (labels, phi_map, p_map); phi_map[g][i] and p_map[g][j] are
    indices into labels, or None for p_T when the last product is fitted
    as one parameter (then phi_map[g][t-2] points at the product)."""
    labels = []

    def idx(name):
        if name not in labels:
            labels.append(name)
        return labels.index(name)

    prod = phis in ("t", "g*t") and ps in ("t", "g*t")
    phi_map, p_map = {}, {}
    for g in groups:
        phi_map[g] = [None] * (t - 1)
        p_map[g] = [None] * t
        for i in range(t - 1):
            if prod and i == t - 2:
                continue
            phi_map[g][i] = idx(names_for(phis, "phi", g, i + 1))
        for j in range(1, t):
            if prod and j == t - 1:
                continue
            p_map[g][j] = idx(names_for(ps, "p", g, j + 1))
    if prod:
        for g in groups:
            a = names_for(phis, "phi", g, t - 1)
            b = names_for(ps, "p", g, t)
            phi_map[g][t - 2] = idx(a + "*" + b)
    return labels, phi_map, p_map


def loglik(theta, data, t, phi_map, p_map):
    ll = 0.0
    for g, (R, m) in data.items():
        phi = [expit(theta[phi_map[g][i]]) for i in range(t - 1)]
        p = [None] + [1.0 if p_map[g][j] is None else expit(theta[p_map[g][j]]) for j in range(1, t)]
        for i in range(t - 1):
            total = 0.0
            for j in range(i + 1, t):
                pij = 1.0
                for k in range(i, j):
                    pij *= phi[k]
                for k in range(i + 1, j):
                    pij *= 1 - p[k]
                pij *= p[j]
                total += pij
                if m[i][j] > 0:
                    ll += m[i][j] * math.log(pij)
            never = R[i] - sum(m[i])
            if never > 0:
                ll += never * math.log(1 - total)
    return ll


def hessian(f, x, h=1e-4):
    n = len(x)
    H = np.zeros((n, n))
    for a in range(n):
        for b in range(a, n):
            def at(da, db):
                y = np.array(x, dtype=float)
                y[a] += da
                y[b] += db
                return f(y)
            v = (at(h, h) - at(h, -h) - at(-h, h) + at(-h, -h)) / (4 * h * h)
            H[a, b] = H[b, a] = v
    return H


def fit(data, phis, ps):
    groups = list(data.keys())
    t = len(next(iter(data.values()))[0])
    labels, phi_map, p_map = build(groups, t, phis, ps)
    neg = lambda th: -loglik(th, data, t, phi_map, p_map)
    best = None
    for start in (0.0, 0.5, 1.5, -0.5):
        r = minimize(neg, np.full(len(labels), start), method="BFGS", options={"gtol": 1e-9, "maxiter": 5000})
        r = minimize(neg, r.x, method="Nelder-Mead", options={"xatol": 1e-10, "fatol": 1e-12, "maxiter": 200000, "maxfev": 200000})
        r = minimize(neg, r.x, method="BFGS", options={"gtol": 1e-10, "maxiter": 5000})
        if best is None or r.fun < best.fun:
            best = r
    x = best.x
    H = hessian(neg, x)
    cov = np.linalg.inv(H)
    params = {}
    for k, name in enumerate(labels):
        est = float(expit(x[k]))
        se = float(math.sqrt(cov[k, k]) * est * (1 - est))
        params[name] = {"estimate": est, "se": se}
    return {"loglik": -float(best.fun), "k": len(labels), "params": params}


def main():
    out = {"generator": "cjs_reference.py with scipy %s, numpy %s" % (__import__("scipy").__version__, np.__version__)}
    R, m = read_marray("dipper-marray.csv")
    dipper = {"": (R, m)}
    out["dipper"] = {}
    for phis, ps in ((".", "."), ("t", "."), (".", "t"), ("t", "t")):
        out["dipper"]["phi(%s) p(%s)" % (phis, ps)] = fit(dipper, phis, ps)
    groups = simulate_groups()
    write_groups("groups-marray.csv", groups)
    out["groups"] = {}
    for phis, ps in ((".", "."), ("g", "."), (".", "g"), ("g", "g"), ("g", "t"), ("g*t", "."), ("t", "t"), ("g*t", "g*t")):
        out["groups"]["phi(%s) p(%s)" % (phis, ps)] = fit(groups, phis, ps)
    json.dump(out, sys.stdout, indent=1, sort_keys=True)
    sys.stdout.write("\n")


if __name__ == "__main__":
    main()
