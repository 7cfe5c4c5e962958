#!/usr/bin/python3
"""Independent maximum-likelihood fit of the Jolly-Seber superpopulation
model (Schwarz & Arnason 1996) for the tests of jsml.go.

The likelihood is written here history by history, with each animal's
probability summed explicitly over its possible entry occasions (not the
recursion and per-occasion totals used in jsml.go):

    P(history) = sum_{e <= f} b_e prod_{e <= j < f} (1 - p_j) phi_j
                 * p_f * [between first and last capture]
                 * [not seen after the last capture, unless lost on capture]
    P(never seen) = sum_e b_e * Q_e,  Q_e = P(never caught from e on)
    ln L = ln N! - ln (N - U)! + sum_animals ln P(history)
           + (N - U) ln P(never seen)

and maximised with scipy.optimize.minimize (BFGS from several starts, then
Nelder-Mead polish). Standard errors come from a central-difference Hessian
(numpy) and the delta method. Models: phi(.) p(.) b(t) and
phi(t) p(t) b(t) with p_1 = p_2 and p_T = p_{T-1}.

Run with Debian's python3-scipy:
    /usr/bin/python3 jsml_scipy.py > jsml_scipy_output.csv
"""
import csv
import math
import os

import numpy as np
from scipy.optimize import minimize
from scipy.special import expit, gammaln

HERE = os.path.dirname(os.path.abspath(__file__))


def load():
    hist, lost = [], []
    with open(os.path.join(HERE, "jsml_histories.csv")) as f:
        for rec in csv.DictReader(f):
            hist.append([c == "1" for c in rec["history"]])
            lost.append(rec["removed"] == "1")
    return np.array(hist), np.array(lost)


H, LOST = load()
U, T = H.shape


def unpack(x, model):
    n = U + math.exp(x[0])
    eta = np.concatenate([[0.0], x[1:T]])
    b = np.exp(eta - eta.max())
    b /= b.sum()
    rest = x[T:]
    if model == "const":
        phi = np.full(T - 1, expit(rest[0]))
        p = np.full(T, expit(rest[1]))
    else:
        phi = expit(rest[: T - 1])
        inner = expit(rest[T - 1:])  # p_2 .. p_{T-1}
        p = np.concatenate([[inner[0]], inner, [inner[-1]]])
    return n, b, phi, p


def never_after(j, phi, p):
    """P(not caught after occasion j | alive at j)."""
    if j == T - 1:
        return 1.0
    # alive at j: dies before j+1, or survives, is missed at j+1, and so on.
    return (1 - phi[j]) + phi[j] * (1 - p[j + 1]) * never_after(j + 1, phi, p)


def never_from(e, phi, p):
    """P(never caught on occasions e..T-1 | alive at e)."""
    return (1 - p[e]) * never_after(e, phi, p)


def loglik(x, model):
    n, b, phi, p = unpack(x, model)
    if n <= U:
        return -np.inf
    ll = gammaln(n + 1) - gammaln(n - U + 1)
    for row, lost in zip(H, LOST):
        idx = np.flatnonzero(row)
        f, l = idx[0], idx[-1]
        enter = 0.0
        for e in range(f + 1):
            term = b[e]
            for j in range(e, f):
                term *= (1 - p[j]) * phi[j]
            enter += term
        prob = enter * p[f]
        for j in range(f, l):
            prob *= phi[j]
            prob *= p[j + 1] if row[j + 1] else (1 - p[j + 1])
        if not lost:
            prob *= never_after(l, phi, p)
        ll += math.log(prob)
    unseen = sum(b[e] * never_from(e, phi, p) for e in range(T))
    ll += (n - U) * math.log(unseen)
    return ll


def derived(x, model):
    n, b, phi, p = unpack(x, model)
    lost = np.zeros(T)
    for row, l in zip(H, LOST):
        if l:
            lost[np.flatnonzero(row)[-1]] += 1
    nocc = np.zeros(T)
    nocc[0] = n * b[0]
    for i in range(T - 1):
        nocc[i + 1] = (nocc[i] - lost[i]) * phi[i] + n * b[i + 1]
    out = {"N": n}
    if model == "const":
        out["phi"] = phi[0]
        out["p"] = p[0]
    else:
        for i in range(T - 1):
            out[f"phi[{i + 1}]"] = phi[i]
        for j in range(T):
            out[f"p[{j + 1}]"] = p[j]
    for j in range(T):
        out[f"N[{j + 1}]"] = nocc[j]
    for i in range(T - 1):
        out[f"B[{i + 1}]"] = n * b[i + 1]
    return out


def hessian(f, x, h=1e-4):
    k = len(x)
    hs = np.zeros((k, k))
    for i in range(k):
        for j in range(i, k):
            def at(di, dj):
                y = np.array(x, dtype=float)
                y[i] += di
                y[j] += dj
                return f(y)
            v = (at(h, h) - at(h, -h) - at(-h, h) + at(-h, -h)) / (4 * h * h)
            hs[i, j] = hs[j, i] = v
    return hs


def fit(model):
    k = T + (2 if model == "const" else (T - 1) + (T - 2))
    neg = lambda x: -loglik(x, model)
    best = None
    for start in (0.0, 0.5, -0.5):
        x0 = np.full(k, start)
        x0[0] = math.log(0.5 * U)
        r = minimize(neg, x0, method="BFGS", options={"gtol": 1e-8, "maxiter": 5000})
        r = minimize(neg, r.x, method="Nelder-Mead",
                     options={"xatol": 1e-9, "fatol": 1e-11, "maxiter": 40000, "maxfev": 40000})
        r = minimize(neg, r.x, method="BFGS", options={"gtol": 1e-9, "maxiter": 5000})
        if best is None or r.fun < best.fun:
            best = r
    x = best.x
    cov = np.linalg.inv(-hessian(lambda y: loglik(y, model), x))
    est = derived(x, model)
    names = list(est)
    se = {}
    for name in names:
        g = np.zeros(k)
        for i in range(k):
            d = 1e-5
            xp, xm = x.copy(), x.copy()
            xp[i] += d
            xm[i] -= d
            g[i] = (derived(xp, model)[name] - derived(xm, model)[name]) / (2 * d)
        se[name] = math.sqrt(g @ cov @ g)
    return -best.fun, est, se


def main():
    print("model,name,estimate,se")
    for model, label in (("const", "phi(.) p(.) b(t)"), ("time", "phi(t) p(t) b(t)")):
        ll, est, se = fit(model)
        print(f"{label},loglik,{ll!r},0")
        for name in est:
            print(f"{label},{name},{est[name]!r},{se[name]!r}")


if __name__ == "__main__":
    main()
