#!/usr/bin/python3
"""Independent maximum-likelihood fit of the robust-design model of
robustml.go (Kendall, Pollock & Brownie 1995; random temporary emigration
of Kendall, Nichols & Hines 1997) with M0 or Mt within primary periods.

The log-likelihood is written animal by animal (robustml.go collects it
into per-primary totals):

  first captures, primary i: lnG(U_i+1) - lnG(U_i-u_i+1)
      + sum over animals first caught in i at secondary s of
        [sum_{s' < s} ln(1-p_is') + ln p_is]
      + (U_i - u_i) sum_s ln(1-p_is)
  each animal after its first capture: Bernoulli(p) on the later
      secondaries of that primary; for each later primary up to its last
      capture: phi, then (1-gamma) * Bernoulli(p) on every secondary if
      caught, q = gamma + (1-gamma)(1-p)^S if not; after the last capture,
      chi (never seen again) unless lost on capture.

It is maximised with scipy.optimize.minimize (BFGS from several starts,
Nelder-Mead polish) for emigration "none" and "random" (gamma_K =
gamma_{K-1}), each with M0 (one p per primary) or Mt (one p per secondary
occasion, labels with "-mt") within primaries. Output: the maximised log-likelihood and phi, gamma, p and
N_i = U_i + m_i / p*_i.

Run with Debian's python3-scipy:
    /usr/bin/python3 robust_scipy.py > robust_scipy_output.csv
"""
import csv
import math
import os

import numpy as np
from scipy.optimize import minimize
from scipy.special import expit, gammaln

HERE = os.path.dirname(os.path.abspath(__file__))


def load():
    rows, lost, primary = [], [], None
    with open(os.path.join(HERE, "robust_histories.csv")) as f:
        for line in f:
            line = line.strip()
            if line.startswith("# primary"):
                primary = [int(v) for v in line.split(":")[1].split()]
                continue
            if not line or line.startswith("#") or line.startswith("history"):
                continue
            h, r = line.split(",")
            rows.append([c == "1" for c in h])
            lost.append(r == "1")
    return np.array(rows), lost, primary


H, LOST, PRIMARY = load()
GROUPS = []
for j, lab in enumerate(PRIMARY):
    if j == 0 or lab != PRIMARY[j - 1]:
        GROUPS.append([j])
    else:
        GROUPS[-1].append(j)
K = len(GROUPS)
S = [len(g) for g in GROUPS]


def animal_parts(row):
    caught = [any(row[j] for j in g) for g in GROUPS]
    prim = [i for i in range(K) if caught[i]]
    return prim[0], prim[-1], caught


FIRST = [animal_parts(r) for r in H]
U_SEEN = np.zeros(K)
MARKED = np.zeros(K)
for f, l, caught in FIRST:
    U_SEEN[f] += 1
    for i in range(f + 1, K):
        if caught[i]:
            MARKED[i] += 1


T = len(PRIMARY)


def unpack(x, random, mt):
    """phi (K-1), gamma (K), p per occasion (T), U (K)."""
    phi = expit(x[: K - 1])
    off = K - 1
    gamma = np.zeros(K)
    if random:
        g = expit(x[off: off + K - 2])
        gamma[1: K - 1] = g
        gamma[K - 1] = g[-1]
        off += K - 2
    if mt:
        p = expit(x[off: off + T])
        off += T
    else:
        pk = expit(x[off: off + K])
        p = np.array([pk[i] for i, g in enumerate(GROUPS) for _ in g])
        off += K
    U = U_SEEN + np.exp(x[off: off + K])
    return phi, gamma, p, U


def loglik(x, random, mt):
    phi, gamma, p, U = unpack(x, random, mt)
    q = np.array([gamma[i] + (1 - gamma[i]) * np.prod([1 - p[j] for j in GROUPS[i]]) for i in range(K)])

    def chi(i):
        if i == K - 1:
            return 1.0
        return 1 - phi[i] + phi[i] * q[i + 1] * chi(i + 1)

    ll = 0.0
    for i in range(K):
        ll += gammaln(U[i] + 1) - gammaln(U[i] - U_SEEN[i] + 1)
        ll += (U[i] - U_SEEN[i]) * sum(math.log(1 - p[j]) for j in GROUPS[i])
    for row, lost, (f, l, caught) in zip(H, LOST, FIRST):
        last_occ = max(j for j in range(len(row)) if row[j])
        done = False
        # first primary: misses before the first capture, the capture,
        # then Bernoulli trials
        started = False
        for s, j in enumerate(GROUPS[f]):
            if not started:
                if row[j]:
                    ll += sum(math.log(1 - p[jb]) for jb in GROUPS[f][:s]) + math.log(p[j])
                    started = True
                    if lost and j == last_occ:
                        done = True
                        break
                continue
            ll += math.log(p[j]) if row[j] else math.log(1 - p[j])
            if lost and j == last_occ:
                done = True
                break
        for i in range(f + 1, l + 1):
            if done:
                break
            ll += math.log(phi[i - 1])
            if not caught[i]:
                ll += math.log(q[i])
                continue
            ll += math.log(1 - gamma[i])
            for j in GROUPS[i]:
                ll += math.log(p[j]) if row[j] else math.log(1 - p[j])
                if lost and j == last_occ:
                    done = True
                    break
        if not lost:
            ll += math.log(chi(l))
    return ll


def fit(random, mt):
    k = (K - 1) + (K - 2 if random else 0) + (T if mt else K) + K
    neg = lambda x: -loglik(x, random, mt)
    best = None
    for start in (0.0, -0.5, 0.5):
        x0 = np.full(k, start)
        x0[k - K:] = np.log(U_SEEN * 0.3 + 1)
        r = minimize(neg, x0, method="BFGS", options={"gtol": 1e-8, "maxiter": 5000})
        r = minimize(neg, r.x, method="Nelder-Mead",
                     options={"xatol": 1e-9, "fatol": 1e-11, "maxiter": 40000, "maxfev": 40000})
        r = minimize(neg, r.x, method="BFGS", options={"gtol": 1e-9, "maxiter": 5000})
        if best is None or r.fun < best.fun:
            best = r
    phi, gamma, p, U = unpack(best.x, random, mt)
    out = {"loglik": -best.fun}
    for i in range(K - 1):
        out[f"phi[{i + 1}]"] = phi[i]
    if random:
        for i in range(1, K):
            out[f"gamma[{i + 1}]"] = gamma[i]
    for i, g in enumerate(GROUPS):
        if mt:
            for s, j in enumerate(g):
                out[f"p[{i + 1},{s + 1}]"] = p[j]
        else:
            out[f"p[{i + 1}]"] = p[g[0]]
    for i, g in enumerate(GROUPS):
        pstar = 1 - np.prod([1 - p[j] for j in g])
        out[f"N[{i + 1}]"] = U[i] + MARKED[i] / pstar
    return out


def main():
    print("model,name,estimate")
    for label, random, mt in (("none", False, False), ("random", True, False),
                              ("none-mt", False, True), ("random-mt", True, True)):
        for name, v in fit(random, mt).items():
            print(f"{label},{name},{v!r}")


if __name__ == "__main__":
    main()
