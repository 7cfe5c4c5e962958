#!/usr/bin/python3
"""Independent reference values for the likelihood models of package closed
(M0, Mt, Mb, Mh, Mth, Mtb and Huggins), computed with Debian's python3-scipy.

Run:  /usr/bin/python3 scipy_likelihood.py > scipy_likelihood.json
The Go tests (likelihood_test.go) read the committed JSON.

Independence from the Go code: every log-likelihood here is written animal
by animal (a product over each animal's occasions, including the unseen
animals' all-zero history), not from the sufficient statistics the Go code
uses; maxima come from scipy.optimize (Nelder-Mead from several starts,
then BFGS); standard errors from a central-difference Hessian written here;
profile intervals from scipy.optimize.brentq on the profile deviance.

Parameterisation (the same working scale as the Go code, so a test point x
means the same parameters in both): x[0] = ln(N - Mt1), then logits:
  M0  [s, logit p]
  Mt  [s, logit p_1..p_t]
  Mb  [s, logit p, logit c]
  Mh  [s, logit p1, logit p2, logit w]          w = proportion with p1
  Mth [s, a_1..a_t, d, logit w]                 logit p = a_j (prop. w), a_j + d
  Mtb [s, e_1..e_t, b]                          p_j = expit(e_j), c_j = expit(e_j + b)
The log-likelihood leaves out the multinomial constant over distinct
histories, as the Go code does.
Huggins: [b0, b_cov...(, a_2..a_t)] on the covariates' own units,
conditional on capture; N = sum 1/p*, var = sum (1-p*)/p*^2 + d'Sd.
"""
import csv
import json
import os
import sys

import numpy as np
from scipy import optimize, special

HERE = os.path.dirname(os.path.abspath(__file__))
CHI = 3.841458820694124


def expit(x):
    return special.expit(x)


def read_histories():
    X, male, mass, lost = [], [], [], []
    with open(os.path.join(HERE, "likelihood_histories.csv")) as f:
        for r in csv.DictReader(f):
            X.append([int(c) for c in r["history"]])
            male.append(float(r["male"]))
            mass.append(float(r["mass"]))
            lost.append(r["removed"] == "1")
    return np.array(X), np.array(male), np.array(mass), np.array(lost)


def read_cottontail():
    rows = []
    with open(os.path.join(HERE, "cottontail-frequencies.csv")) as f:
        for r in csv.DictReader(f):
            rows.append((int(r["captures"]), int(r["frequency"])))
    T = len(rows)
    X = []
    for k, fk in rows:
        for _ in range(fk):
            X.append([1] * k + [0] * (T - k))
    return np.array(X)


def availability(X, lost):
    n, T = X.shape
    A = np.ones_like(X)
    for i in range(n):
        if lost[i]:
            last = max(j for j in range(T) if X[i, j])
            A[i, last + 1:] = 0
    return A


def caught_before(X):
    B = np.zeros_like(X)
    B[:, 1:] = np.cumsum(X, axis=1)[:, :-1] > 0
    return B


def bern(X, A, P):
    """Sum over available occasions of ln P^x (1-P)^(1-x), per animal."""
    return np.sum(A * (X * np.log(P) + (1 - X) * np.log1p(-P)), axis=1)


class Data:
    def __init__(self, X, lost):
        self.X = X
        self.n, self.T = X.shape
        self.A = availability(X, lost)
        self.B = caught_before(X)
        self.Z0 = np.zeros((1, self.T), dtype=int)
        self.A0 = np.ones((1, self.T), dtype=int)


def nterm(mt1, f0):
    return special.gammaln(mt1 + f0 + 1) - special.gammaln(f0 + 1)


def ll_m0(x, d):
    f0, p = np.exp(x[0]), expit(x[1])
    P = np.full(d.X.shape, p)
    return nterm(d.n, f0) + bern(d.X, d.A, P).sum() + f0 * bern(d.Z0, d.A0, P[:1]).sum()


def ll_mt(x, d):
    f0, p = np.exp(x[0]), expit(np.asarray(x[1:]))
    P = np.tile(p, (d.n, 1))
    return nterm(d.n, f0) + bern(d.X, d.A, P).sum() + f0 * bern(d.Z0, d.A0, P[:1]).sum()


def ll_mb(x, d):
    f0, p, c = np.exp(x[0]), expit(x[1]), expit(x[2])
    P = np.where(d.B == 1, c, p)
    return nterm(d.n, f0) + bern(d.X, d.A, P).sum() + f0 * d.T * np.log1p(-p)


def mix(l1, l2):
    return np.logaddexp(l1, l2)


def ll_mh(x, d):
    f0, p1, p2, w = np.exp(x[0]), expit(x[1]), expit(x[2]), expit(x[3])
    P1, P2 = np.full(d.X.shape, p1), np.full(d.X.shape, p2)
    li = mix(np.log(w) + bern(d.X, d.A, P1), np.log1p(-w) + bern(d.X, d.A, P2))
    l0 = mix(np.log(w) + d.T * np.log1p(-p1), np.log1p(-w) + d.T * np.log1p(-p2))
    return nterm(d.n, f0) + li.sum() + f0 * l0


def ll_mth(x, d):
    T = d.T
    f0, a, dd, w = np.exp(x[0]), np.asarray(x[1:T + 1]), x[T + 1], expit(x[T + 2])
    P1, P2 = np.tile(expit(a), (d.n, 1)), np.tile(expit(a + dd), (d.n, 1))
    li = mix(np.log(w) + bern(d.X, d.A, P1), np.log1p(-w) + bern(d.X, d.A, P2))
    l0 = mix(np.log(w) + np.log1p(-expit(a)).sum(), np.log1p(-w) + np.log1p(-expit(a + dd)).sum())
    return nterm(d.n, f0) + li.sum() + f0 * l0


def ll_mtb(x, d):
    T = d.T
    f0, e, b = np.exp(x[0]), np.asarray(x[1:T + 1]), x[T + 1]
    P = np.where(d.B == 1, np.tile(expit(e + b), (d.n, 1)), np.tile(expit(e), (d.n, 1)))
    return nterm(d.n, f0) + bern(d.X, d.A, P).sum() + f0 * np.log1p(-expit(e)).sum()


MODELS = {"M0": ll_m0, "Mt": ll_mt, "Mb": ll_mb, "Mh": ll_mh, "Mth": ll_mth, "Mtb": ll_mtb}


def size(name, T):
    return {"M0": 2, "Mt": T + 1, "Mb": 3, "Mh": 4, "Mth": T + 3, "Mtb": T + 2}[name]


def safe(f):
    def g(x):
        with np.errstate(all="ignore"):
            v = f(x)
        return -v if np.isfinite(v) else 1e300
    return g


def maximise(negll, starts):
    best = None
    for x0 in starts:
        r = optimize.minimize(negll, x0, method="Nelder-Mead",
                              options={"maxiter": 200000, "maxfev": 200000, "xatol": 1e-10, "fatol": 1e-12, "adaptive": True})
        r = optimize.minimize(negll, r.x, method="BFGS", options={"gtol": 1e-9})
        if best is None or r.fun < best.fun:
            best = r
    return best


def hessian(f, x, h=1e-4):
    k = len(x)
    H = np.zeros((k, k))
    for i in range(k):
        for j in range(i, k):
            def at(di, dj):
                y = np.array(x, dtype=float)
                y[i] += di
                y[j] += dj
                return f(y)
            H[i, j] = H[j, i] = (at(h, h) - at(h, -h) - at(-h, h) + at(-h, -h)) / (4 * h * h)
    return H


def starts_for(name, d):
    T = d.T
    tot = d.X.sum()
    p0 = tot / (d.T * d.n * 1.3)
    base = [np.log(0.3 * d.n)]
    lg = special.logit
    if name == "M0":
        return [base + [lg(p0)], [np.log(0.05 * d.n), lg(p0 * 1.2)]]
    if name == "Mt":
        return [base + [lg(p0)] * T, [np.log(0.1 * d.n)] + [lg(p0 * 1.1)] * T]
    if name == "Mb":
        return [base + [lg(p0), lg(p0)], [np.log(0.1 * d.n), lg(p0 * 0.8), lg(p0 * 1.2)]]
    if name == "Mh":
        return [[np.log(0.5 * d.n), lg(p0 / 3), lg(min(0.9, 2 * p0)), 0.0],
                [np.log(0.3 * d.n), lg(p0 / 2), lg(min(0.9, 1.5 * p0)), 1.0],
                [np.log(1.0 * d.n), lg(p0 / 5), lg(min(0.9, 1.2 * p0)), 1.5],
                [np.log(0.2 * d.n), lg(p0 * 0.8), lg(min(0.95, 3 * p0)), -1.0]]
    if name == "Mth":
        return [[np.log(0.5 * d.n)] + [lg(p0 / 2)] * T + [1.5, 0.0],
                [np.log(1.0 * d.n)] + [lg(p0 / 4)] * T + [2.5, 1.0],
                [np.log(0.3 * d.n)] + [lg(p0)] * T + [-1.0, -0.5]]
    if name == "Mtb":
        return [base + [lg(p0)] * T + [0.0], [np.log(0.6 * d.n)] + [lg(p0 * 0.8)] * T + [0.5]]


def profile_ci(name, d, xhat, llmax):
    """Profile-likelihood 95% interval for N by brentq on the deviance."""
    f = MODELS[name]
    warm = [np.array(xhat[1:])]

    def prof(f0):
        s = np.log(f0) if f0 > 0 else -np.inf
        neg = safe(lambda y: f(np.concatenate([[s], y]), d))
        r = maximise(neg, [warm[0]])
        warm[0] = r.x
        return -r.fun

    def dev(f0):
        return 2 * (llmax - prof(f0)) - CHI

    fhat = np.exp(xhat[0])
    warm[0] = np.array(xhat[1:])
    if dev(0.0) <= 0:
        low = d.n
    else:
        warm[0] = np.array(xhat[1:])
        low = d.n + optimize.brentq(dev, 0.0, fhat, xtol=1e-6)
    warm[0] = np.array(xhat[1:])
    hi = fhat * 2 + 1
    while dev(hi) < 0:
        hi *= 2
        if hi > 1e6 * d.n:
            return [float(low), None]
    warm[0] = np.array(xhat[1:])
    high = d.n + optimize.brentq(dev, fhat, hi, xtol=1e-6)
    return [float(low), float(high)]


def test_point(name, T):
    """A fixed point at which both implementations evaluate lnL."""
    return {
        "M0": [np.log(30.0), -1.1],
        "Mt": [np.log(30.0)] + [-1.3 + 0.1 * j for j in range(T)],
        "Mb": [np.log(30.0), -1.2, -0.8],
        "Mh": [np.log(40.0), -2.0, 0.1, 0.3],
        "Mth": [np.log(40.0)] + [-2.0 + 0.1 * j for j in range(T)] + [1.7, 0.2],
        "Mtb": [np.log(35.0)] + [-1.4 + 0.05 * j for j in range(T)] + [0.4],
    }[name]


def fit_full(name, d, want_profile=True):
    f = MODELS[name]
    neg = safe(lambda x: f(x, d))
    r = maximise(neg, starts_for(name, d))
    x = r.x
    llmax = -r.fun
    H = hessian(lambda y: -f(y, d), x)
    out = {"model": name, "loglik": float(llmax), "x": [float(v) for v in x],
           "N": float(d.n + np.exp(x[0])), "K": size(name, d.T)}
    try:
        cov = np.linalg.inv(H)
        out["se_N"] = float(np.exp(x[0]) * np.sqrt(cov[0, 0])) if cov[0, 0] > 0 else None
    except np.linalg.LinAlgError:
        out["se_N"] = None
    tp = test_point(name, d.T)
    out["test_point"] = [float(v) for v in tp]
    out["loglik_at_test_point"] = float(f(np.array(tp), d))
    if want_profile:
        out["profile_ci"] = profile_ci(name, d, x, llmax)
    return out


def huggins(X, lost, covs, time):
    """Huggins conditional likelihood on the covariates' own units."""
    n, T = X.shape
    A = availability(X, lost)
    Z = np.column_stack(covs) if covs else np.zeros((n, 0))
    k = 1 + Z.shape[1] + (T - 1 if time else 0)

    def eta(b):
        e = b[0] + Z @ b[1:1 + Z.shape[1]]
        E = np.tile(e[:, None], (1, T))
        if time:
            E[:, 1:] += b[1 + Z.shape[1]:]
        return E

    def ll(b):
        E = eta(b)
        P = expit(E)
        pstar = 1 - np.prod(1 - P, axis=1)
        return float(np.sum(bern(X, A, P) - np.log(pstar)))

    def nhat(b):
        P = expit(eta(b))
        pstar = 1 - np.prod(1 - P, axis=1)
        return float(np.sum(1 / pstar)), pstar

    neg = safe(ll)
    starts = [np.zeros(k), np.concatenate([[-1.0], np.zeros(k - 1)])]
    r = maximise(neg, starts)
    b = r.x
    H = hessian(lambda y: -ll(y), b, h=1e-5)
    cov = np.linalg.inv(H)
    N, pstar = nhat(b)
    # dN/db by central differences on nhat
    dN = np.zeros(k)
    for i in range(k):
        h = 1e-6 * max(1.0, abs(b[i]))
        bp, bm = b.copy(), b.copy()
        bp[i] += h
        bm[i] -= h
        dN[i] = (nhat(bp)[0] - nhat(bm)[0]) / (2 * h)
    var = float(np.sum((1 - pstar) / pstar ** 2) + dN @ cov @ dN)
    return {"loglik": float(-r.fun), "beta": [float(v) for v in b],
            "beta_se": [float(v) for v in np.sqrt(np.diag(cov))], "N": N, "se_N": float(np.sqrt(var)), "K": k}


def main():
    X, male, mass, lost = read_histories()
    out = {"scipy": __import__("scipy").__version__, "numpy": np.__version__}
    d_plain = Data(X, np.zeros(len(X), dtype=bool))
    d_lost = Data(X, lost)
    out["histories"] = [fit_full(m, d_plain) for m in ["M0", "Mt", "Mb", "Mh", "Mth", "Mtb"]]
    out["histories_with_losses"] = [fit_full(m, d_lost) for m in ["M0", "Mt", "Mb", "Mh", "Mth", "Mtb"]]
    C = read_cottontail()
    d_cott = Data(C, np.zeros(len(C), dtype=bool))
    out["cottontail"] = [fit_full(m, d_cott) for m in ["M0", "Mh"]]
    nolost = np.zeros(len(X), dtype=bool)
    out["huggins"] = [
        dict(covariates=["male", "mass"], time=False, lost=False, **huggins(X, nolost, [male, mass], False)),
        dict(covariates=["mass"], time=True, lost=False, **huggins(X, nolost, [mass], True)),
        dict(covariates=["mass"], time=False, lost=True, **huggins(X, lost, [mass], False)),
    ]
    json.dump(out, sys.stdout, indent=1)
    sys.stdout.write("\n")


if __name__ == "__main__":
    main()
