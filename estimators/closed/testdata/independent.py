#!/usr/bin/python3
"""Independent reference values for package closed's tests.

Run with Debian's python3-scipy:  /usr/bin/python3 independent.py > independent.json
The Go tests read independent.json. Nothing here imports or mirrors the Go
code: every number comes from scipy/numpy or from a direct evaluation of
the published formula or likelihood. Data sets other than the cottontail
frequencies are invented for the tests.
"""
import itertools
import json
import math

import numpy as np
from scipy import optimize, special, stats

out = {}

# --- two-sample: exact Poisson (Garwood) and Clopper-Pearson limits -------
def garwood(x):
    lo = stats.chi2.ppf(0.025, 2 * x) / 2 if x > 0 else 0.0
    hi = stats.chi2.ppf(0.975, 2 * x + 2) / 2
    return lo, hi

def clopper(x, n):
    lo = stats.beta.ppf(0.025, x, n - x + 1) if x > 0 else 0.0
    hi = stats.beta.ppf(0.975, x + 1, n - x) if x < n else 1.0
    return lo, hi

two = []
for M, C, R in [(120, 95, 28), (40, 60, 3), (2000, 900, 60)]:
    plo, phi = garwood(R)
    blo, bhi = clopper(R, C)
    chap = lambda r: (M + 1) * (C + 1) / (r + 1) - 1
    two.append({
        "M": M, "C": C, "R": R,
        "poisson_mean": [plo, phi],
        "binomial_p": [blo, bhi],
        "chapman_poisson": [chap(phi), chap(plo)],
        "chapman_binomial": [chap(bhi * C), chap(blo * C)],
        "lp_binomial": [M / bhi, M / blo],
    })
out["two_sample"] = two

# --- multiple census: Schnabel and Schumacher-Eschmeyer by regression -----
census = []
for C, R in [([32, 41, 38, 45, 36, 40], [0, 5, 9, 14, 15, 20]),
             ([60, 70, 65, 80, 75, 70, 72], [0, 8, 14, 22, 28, 30, 35])]:
    C = np.array(C, float); R = np.array(R, float)
    M = np.concatenate([[0], np.cumsum(C - R)[:-1]])
    sCM, sR = (C * M).sum(), R.sum()
    # Schumacher-Eschmeyer as weighted least squares through the origin of
    # y = R/C on M with weights C, solved by numpy's lstsq (not the closed form).
    use = M > 0
    w = np.sqrt(C[use])
    A = (M[use] * w)[:, None]
    y = (R[use] / C[use]) * w
    slope, res, *_ = np.linalg.lstsq(A, y, rcond=None)
    b = slope[0]
    # Residual degrees of freedom: one slope fitted to the points with
    # marked animals at large, i.e. Seber's (1982) s - 2 with s counting
    # the first sample (which has no marked animals and gives no point).
    df = use.sum() - 1
    rss = ((y - A[:, 0] * b) ** 2).sum()
    se_b = math.sqrt(rss / df / (A[:, 0] ** 2).sum())
    tq = stats.t.ppf(0.975, df)
    entry = {
        "caught": C.tolist(), "recaptured": R.tolist(),
        "schnabel_plus1": sCM / (sR + 1), "schnabel": sCM / sR,
        "se_N": 1 / b, "se_limits": [1 / (b + tq * se_b), 1 / (b - tq * se_b)],
    }
    if sR < 50:
        lo, hi = garwood(int(sR))
        entry["schnabel_plus1_limits"] = [sCM / (hi + 1), sCM / (lo + 1)]
    else:
        se_inv = math.sqrt(sR) / sCM
        inv = 1 / (sCM / (sR + 1))
        z = stats.norm.ppf(0.975)
        entry["schnabel_plus1_limits"] = [1 / (inv + z * se_inv), 1 / (inv - z * se_inv)]
    census.append(entry)
out["census"] = census

# --- removal: Zippin by maximising the conditional likelihood numerically,
# variance by inverting the numerical expected information of the full
# multinomial model; Carle-Strub by direct search of the weighted likelihood
removal = []
for c in [[65, 43, 26], [120, 61, 35, 16], [30, 25, 22], [12, 4, 1]]:
    c = np.array(c, float); k = len(c)
    T = c.sum(); X = (np.arange(k) * c).sum()
    def negcond(p):
        q = 1 - p
        return -(T * math.log(p) + X * math.log(q) - T * math.log(1 - q ** k))
    r = optimize.minimize_scalar(negcond, bounds=(1e-9, 1 - 1e-9), method="bounded",
                                 options={"xatol": 1e-12})
    p = r.x; q = 1 - p
    N = T / (1 - q ** k)
    # expected information for (N, p), cells pi_i = q^(i-1) p, pi_0 = q^k
    def loglik_cells(theta, counts):
        n, pp = theta
        qq = 1 - pp
        cells = [qq ** i * pp for i in range(k)] + [qq ** k]
        return (special.gammaln(n + 1) - special.gammaln(n - counts[:k].sum() + 1)
                + sum(counts[i] * math.log(cells[i]) for i in range(k))
                + (n - counts[:k].sum()) * math.log(cells[k]))
    # Fisher information by the outer product of cell score vectors,
    # with N continuous; score d/dN uses the large-N form log(pi_0)
    eps = 1e-6
    pis = np.array([q ** i * p for i in range(k)] + [q ** k])
    def dlog_cell(i, pp):
        f = lambda x: math.log(((1 - x) ** i * x) if i < k else (1 - x) ** k)
        return (f(pp + eps) - f(pp - eps)) / (2 * eps)
    # I_pp = N * sum pi_i (d log pi_i/dp)^2 ; I_NN, I_Np from the
    # multinomial with unknown index (Sanathanan 1972): treat N as a
    # parameter with score log(pi_0) + sum_{j<...} (large-N approximation)
    Ipp = N * sum(pis[i] * dlog_cell(i, p) ** 2 for i in range(k + 1))
    INN = (1 - pis[k]) / pis[k] / N
    INp = -(1 / pis[k]) * (k * q ** (k - 1)) * 1.0  # d pi_0/dp = -k q^(k-1); score_N = log pi_0 -> d/dp = -k q^(k-1)/pi_0
    # information matrix [[INN, -INp],[...]]: E[-d2l/dN dp] = k q^(k-1)/q^k = k/q
    INp = -k / q
    Imat = np.array([[INN, INp], [INp, Ipp]])
    cov = np.linalg.inv(Imat)
    # Carle-Strub: maximise W(N) = N!/(N-T)! B(T+1, kN - T - Xp + 1 + ...)
    Xp = X  # sum (i-1) c_i
    def logW(n):
        a = k * n - k * T + Xp
        return (special.gammaln(n + 1) - special.gammaln(n - T + 1)
                + special.betaln(T + 1, a + 1))
    ns = np.arange(int(T), int(T) + 200000)
    lw = np.array([logW(n) for n in ns[:20000]])
    ncs = int(ns[int(np.argmax(lw))])
    removal.append({"catches": c.astype(int).tolist(), "zippin_N": N, "zippin_p": p,
                    "zippin_var_info": cov[0, 0], "zippin_varp_info": cov[1, 1],
                    "carle_strub_N": ncs})
out["removal"] = removal

# --- jackknife: occasion-deletion by brute force on an explicit matrix ----
# A small invented matrix (T = 6): delete j occasions in every possible way,
# average the number of animals still seen, and combine with the
# generalized-jackknife weights; compare with the closed forms of Burnham &
# Overton (1978) for orders 1-3 (coefficients from memory) on the cottontail
# frequencies.
rng = np.random.default_rng(20261202)
H = (rng.random((40, 6)) < rng.uniform(0.05, 0.6, size=(40, 1))).astype(int)
H = H[H.sum(1) > 0]
T = H.shape[1]
def S_deleted(j):
    vals = []
    for dele in itertools.combinations(range(T), j):
        keep = [c for c in range(T) if c not in dele]
        vals.append((H[:, keep].sum(1) > 0).sum())
    return float(np.mean(vals))
brute = {}
for kk in range(1, 6):
    tot = 0.0
    for j in range(kk + 1):
        w = (-1) ** j * (T - j) ** kk / (math.factorial(j) * math.factorial(kk - j))
        tot += w * S_deleted(j)
    brute[kk] = tot
freqs = np.bincount(H.sum(1), minlength=T + 1)[1:].tolist()
out["jackknife_brute"] = {"freqs": freqs, "N": [brute[k] for k in range(1, 6)]}

f = [43, 16, 8, 6, 0, 2, 1] + [0] * 11
t = 18; S = sum(f)
f1, f2, f3 = f[0], f[1], f[2]
N1 = S + (t - 1) / t * f1
N2 = S + (2 * t - 3) / t * f1 - (t - 2) ** 2 / (t * (t - 1)) * f2
N3 = (S + (3 * t - 6) / t * f1 - (3 * t * t - 15 * t + 19) / (t * (t - 1)) * f2
      + (t - 3) ** 3 / (t * (t - 1) * (t - 2)) * f3)
out["jackknife_cottontail_closed_form"] = [N1, N2, N3]

# --- Chao Mth (Chao, Lee & Jeng 1992) on an invented matrix ---------------
rng = np.random.default_rng(7)
ind = rng.beta(1.2, 3.0, size=150)
occ = rng.uniform(0.5, 1.5, size=8)
P = np.clip(ind[:, None] * occ[None, :], 0, 0.95)
Hm = (rng.random(P.shape) < P).astype(int)
Hm = Hm[Hm.sum(1) > 0]
with open("mth-invented.csv", "w") as fh:
    fh.write("id,history\n")
    for i, row in enumerate(Hm):
        fh.write("A%03d,%s\n" % (i + 1, "".join(map(str, row))))

def mth(fk, nj):
    k = np.arange(1, len(fk) + 1)
    S = fk.sum(); caps = (k * fk).sum()
    Cc = 1 - fk[0] / caps
    pairs = (nj.sum() ** 2 - (nj ** 2).sum()) / 2
    g2 = max(S / Cc * (k * (k - 1) * fk).sum() / (2 * pairs) - 1, 0)
    return S / Cc + fk[0] / Cc * g2
fk = np.bincount(Hm.sum(1), minlength=Hm.shape[1] + 1)[1:].astype(float)
nj = Hm.sum(0).astype(float)
Nm = mth(fk, nj)
# delta-method variance over the multinomial of distinct histories, with
# derivatives taken analytically-by-complex-step on each history count
hist, counts = np.unique(Hm, axis=0, return_counts=True)
def g_hist(cnt):
    fkk = np.zeros(Hm.shape[1], dtype=complex); njj = np.zeros(Hm.shape[1], dtype=complex)
    for h, c in zip(hist, cnt):
        fkk[h.sum() - 1] += c; njj += c * h
    k = np.arange(1, len(fkk) + 1)
    S = fkk.sum(); caps = (k * fkk).sum()
    Cc = 1 - fkk[0] / caps
    pairs = (njj.sum() ** 2 - (njj ** 2).sum()) / 2
    g2 = S / Cc * (k * (k - 1) * fkk).sum() / (2 * pairs) - 1
    return S / Cc + fkk[0] / Cc * g2
d = np.zeros(len(counts))
for i in range(len(counts)):
    cc = counts.astype(complex); cc[i] += 1e-20j
    d[i] = g_hist(cc).imag / 1e-20
var = (d ** 2 * counts).sum() - (d * counts).sum() ** 2 / Nm
out["chao_mth_invented"] = {"N": Nm, "var": var, "S": int(fk.sum())}

print(json.dumps(out, indent=1))
