#!/usr/bin/env python3
"""Independent reference for the three-level model and CR2 robust inference.

Usage: python multilevel.py OUTDIR

Writes OUTDIR/bcg_clusters.csv, OUTDIR/sim_clusters.csv (the data) and
OUTDIR/multilevel_bcg.json, OUTDIR/multilevel_sim.json (the results).

Nothing here shares code with pondus:
- the (restricted) log-likelihood is computed with DENSE matrices
  (numpy.linalg.slogdet and solve of the full k x k covariance), not the
  closed forms pondus uses, and maximised directly with scipy.optimize
  (Nelder-Mead on log variances from several starts, bounded L-BFGS-B on
  each boundary), taking the best;
- CR2 standard errors, Satterthwaite df and the HTZ test are computed from
  their matrix formulas with full k x k hat matrices (Tipton 2015, Psychol.
  Methods 20:375; Tipton & Pustejovsky 2015, J. Educ. Behav. Stat. 40:604;
  Pustejovsky & Tipton 2018, J. Bus. Econ. Stat. 36:672; cited from memory):
    A_j = V_j^{1/2} [V_j^{1/2} ((I-H) V (I-H)')_jj V_j^{1/2}]^{-1/2} V_j^{1/2}
    V^CR2 = M sum_j X_j' W_j A_j e_j e_j' A_j W_j X_j M
    g_j = (I-H)_j' A_j W_j X_j M c,  df = (sum_j g_j'Vg_j)^2 / sum_ij (g_i'Vg_j)^2
  and the HTZ eta from the same g vectors for the rows of (CMC')^{-1/2} C.

The BCG trials (tests/data/reference/bcg.csv) get invented clusters (pairs
of consecutive trials; the last alone); the simulated set is seeded.
"""

import csv
import json
import math
import os
import sys

import numpy as np
import scipy
from scipy import optimize, stats

HERE = os.path.dirname(os.path.abspath(__file__))
DATA = os.path.join(HERE, "..", "data", "reference")
LN2PI = math.log(2 * math.pi)


def full_v(v, cl, sb, sw):
    k = len(v)
    V = np.diag(np.asarray(v) + sw)
    for a in range(k):
        for b in range(k):
            if cl[a] == cl[b]:
                V[a, b] += sb
    return V


def loglik(y, v, X, cl, sb, sw, reml):
    V = full_v(v, cl, sb, sw)
    W = np.linalg.inv(V)
    XtWX = X.T @ W @ X
    beta = np.linalg.solve(XtWX, X.T @ W @ y)
    r = y - X @ beta
    k, p = X.shape
    ld = np.linalg.slogdet(V)[1]
    q = r @ W @ r
    if reml:
        return -0.5 * ((k - p) * LN2PI + ld + np.linalg.slogdet(XtWX)[1] + q)
    return -0.5 * (k * LN2PI + ld + q)


def line_max(f, hi):
    """max of f on [0, hi] by bounded L-BFGS-B from several starts, and the end 0."""
    best = (0.0, f(0.0))
    for s0 in (hi * 1e-4, hi * 1e-2, hi * 0.1, hi * 0.5):
        res = optimize.minimize(lambda t: -f(t[0]), [s0], method="L-BFGS-B",
                                bounds=[(0.0, hi)], options={"ftol": 1e-15, "gtol": 1e-12})
        if -res.fun > best[1]:
            best = (float(res.x[0]), -float(res.fun))
    # polish with a bounded scalar search around the best point
    s = best[0]
    lo, up = max(0.0, s * 0.5 - 1e-12), max(s * 2.0, 1e-10)
    res = optimize.minimize_scalar(lambda t: -f(t), bounds=(lo, up), method="bounded",
                                   options={"xatol": 1e-14})
    if -res.fun > best[1]:
        best = (float(res.x), -float(res.fun))
    return best


def fit3(y, v, X, cl, reml):
    k = len(y)
    hi = 10 * max(np.var(y), max(v))
    f = lambda sb, sw: loglik(y, v, X, cl, sb, sw, reml)
    b0 = line_max(lambda s: f(0.0, s), hi)  # sigma2_between = 0
    w0 = line_max(lambda s: f(s, 0.0), hi)  # sigma2_within = 0
    best = None
    for start in ((0.5, 0.5), (0.1, 0.9), (0.9, 0.1)):
        s0 = max(b0[0], w0[0], hi * 1e-4)
        t0 = [math.log(s0 * start[0]), math.log(s0 * start[1])]
        res = optimize.minimize(lambda t: -f(math.exp(t[0]), math.exp(t[1])), t0,
                                method="Nelder-Mead",
                                options={"xatol": 1e-12, "fatol": 1e-15, "maxiter": 20000,
                                         "maxfev": 40000})
        if best is None or res.fun < best.fun:
            best = res
    # polish the interior optimum with L-BFGS-B in the original scale
    sb, sw = math.exp(best.x[0]), math.exp(best.x[1])
    res = optimize.minimize(lambda s: -f(s[0], s[1]), [sb, sw], method="L-BFGS-B",
                            bounds=[(0, hi), (0, hi)], options={"ftol": 1e-15, "gtol": 1e-11})
    cands = [(sb, sw, f(sb, sw)), (float(res.x[0]), float(res.x[1]), -float(res.fun)),
             (0.0, b0[0], b0[1]), (w0[0], 0.0, w0[1])]
    sb, sw, ll = max(cands, key=lambda c: c[2])
    return sb, sw, ll, b0[1], w0[1]


def profile_ci(y, v, X, cl, reml, sb, sw, ll, between, level):
    hi = 10 * max(np.var(y), max(v))
    crit = stats.chi2.ppf(level, 1)
    f = lambda a, b: loglik(y, v, X, cl, a, b, reml)

    def g(s):
        other = line_max((lambda o: f(s, o)) if between else (lambda o: f(o, s)), max(hi, 4 * s))
        return 2 * (ll - other[1]) - crit

    s_hat = sb if between else sw
    lower = 0.0
    if s_hat > 0 and g(0.0) > 0:
        lower = optimize.brentq(g, 0.0, s_hat, xtol=1e-14, rtol=1e-12)
    up = max(s_hat, hi * 1e-3) * 2
    while g(up) <= 0:
        up *= 4
    upper = optimize.brentq(g, s_hat, up, xtol=1e-14, rtol=1e-12)
    return lower, upper


def msqrt(A, power):
    w, U = np.linalg.eigh(A)
    big = max(abs(w))
    d = np.array([x ** power if x > 1e-12 * big else 0.0 for x in w])
    return U @ np.diag(d) @ U.T


def cr2(y, v, X, cl, sb, sw):
    k, p = X.shape
    V = full_v(v, cl, sb, sw)
    W = np.linalg.inv(V)
    M = np.linalg.inv(X.T @ W @ X)
    beta = M @ X.T @ W @ y
    IH = np.eye(k) - X @ M @ X.T @ W
    e = IH @ y
    ids = list(dict.fromkeys(cl))
    idx = [[i for i in range(k) if cl[i] == c] for c in ids]
    A, WX = [], []
    meat = np.zeros((p, p))
    for ix in idx:
        Vj = V[np.ix_(ix, ix)]
        half = msqrt(Vj, 0.5)
        Bj = half @ (IH[ix, :] @ V @ IH[ix, :].T) @ half
        Aj = half @ msqrt(Bj, -0.5) @ half
        u = X[ix].T @ W[np.ix_(ix, ix)] @ Aj @ e[ix]
        meat += np.outer(u, u)
        A.append(Aj)
        WX.append(W[np.ix_(ix, ix)] @ X[ix])
    VR = M @ meat @ M

    def gvecs(c):
        out = []
        for ix, Aj, wx in zip(idx, A, WX):
            out.append(IH[ix, :].T @ (Aj @ wx @ M @ c))
        return np.array(out)  # m x k

    coefs = []
    for j in range(p):
        c = np.zeros(p)
        c[j] = 1.0
        G = gvecs(c)
        Om = G @ V @ G.T
        df = np.trace(Om) ** 2 / np.sum(Om ** 2)
        se = math.sqrt(VR[j, j])
        half = float(stats.t.ppf(0.975, df)) * se
        coefs.append({"estimate": float(beta[j]), "robust_se": se, "robust_df": float(df),
                      "robust_p": float(2 * stats.t.sf(abs(beta[j] / se), df)),
                      "robust_ci_low": float(beta[j]) - half,
                      "robust_ci_high": float(beta[j]) + half})
    test = None
    if p > 1:
        q = p - 1
        C = np.eye(p)[1:]
        Q = float((C @ beta) @ np.linalg.solve(C @ VR @ C.T, C @ beta))
        Ct = msqrt(C @ M @ C.T, -0.5) @ C
        Gs = [gvecs(Ct[s]) for s in range(q)]
        denom = 0.0
        for s in range(q):
            for t in range(q):
                Ost = Gs[s] @ V @ Gs[t].T
                Oss = Gs[s] @ V @ Gs[s].T
                Ott = Gs[t] @ V @ Gs[t].T
                denom += np.sum(Ost ** 2) + np.sum(Oss * Ott)
        eta = q * (q + 1) / denom
        F = (eta - q + 1) / (eta * q) * Q
        test = {"statistic": F, "df1": q, "df2": eta - q + 1,
                "p": float(stats.f.sf(F, q, eta - q + 1))}
    return coefs, test


def model_based(y, v, X, cl, sb, sw):
    k, p = X.shape
    V = full_v(v, cl, sb, sw)
    W = np.linalg.inv(V)
    M = np.linalg.inv(X.T @ W @ X)
    beta = M @ X.T @ W @ y
    r = y - X @ beta
    s2 = float(r @ W @ r) / (k - p)
    return beta, M, s2


def run(name, y, v, X, cl, terms):
    y, v, X = np.asarray(y, float), np.asarray(v, float), np.asarray(X, float)
    out = {"data": name, "terms": terms, "fits": {}}
    for method in ("reml", "ml"):
        reml = method == "reml"
        sb, sw, ll, ll_b0, ll_w0 = fit3(y, v, X, cl, reml)
        beta, M, s2 = model_based(y, v, X, cl, sb, sw)
        fit = {
            "sigma2_between": sb, "sigma2_within": sw, "log_likelihood": ll,
            "ll_without_between": ll_b0, "ll_without_within": ll_w0,
            "lr_within": 2 * (ll - ll_w0), "lr_between": 2 * (ll - ll_b0),
            "beta": beta.tolist(), "se_z": np.sqrt(np.diag(M)).tolist(),
            "se_kh": np.sqrt(np.diag(M) * s2).tolist(),
        }
        if reml:
            fit["profile_ci_minimize_scalar"] = {
                "between": profile_ci(y, v, X, cl, reml, sb, sw, ll, True, 0.95),
                "within": profile_ci(y, v, X, cl, reml, sb, sw, ll, False, 0.95),
            }
            coefs, test = cr2(y, v, X, cl, sb, sw)
            fit["robust_three_level"] = {"coefficients": coefs, "htz": test}
            # two-level working model: REML tau2 = the sigma2_between = 0 boundary
            tau2 = line_max(lambda s: loglik(y, v, X, cl, 0.0, s, True),
                            10 * max(np.var(y), max(v)))[0]
            coefs2, test2 = cr2(y, v, X, cl, 0.0, tau2)
            fit["robust_two_level"] = {"tau2": tau2, "coefficients": coefs2, "htz": test2}
        out["fits"][method] = fit
    return out


def write_csv(path, header, rows):
    with open(path, "w", newline="") as fh:
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(header)
        w.writerows(rows)


def main():
    outdir = sys.argv[1]
    os.makedirs(outdir, exist_ok=True)
    source = {"numpy": np.__version__, "scipy": scipy.__version__,
              "python": sys.version.split()[0]}
    # BCG with invented clusters; log risk ratio and its variance.
    with open(os.path.join(DATA, "bcg.csv"), newline="") as fh:
        rows = list(csv.DictReader(fh))
    y, v, X, cl, out_rows = [], [], [], [], []
    for i, r in enumerate(rows):
        a, n1, c, n2 = (float(r[k]) for k in ("treat_events", "treat_n", "ctrl_events", "ctrl_n"))
        y.append(math.log((a / n1) / (c / n2)))
        v.append(1 / a - 1 / n1 + 1 / c - 1 / n2)
        X.append([1.0, float(r["ablat"])])
        cl.append(f"group {i // 2 + 1}")
        out_rows.append([r["study"], cl[-1], repr(y[-1]), repr(v[-1]), r["ablat"]])
    write_csv(os.path.join(outdir, "bcg_clusters.csv"),
              ["study", "group", "effect", "variance", "ablat"], out_rows)
    res = run("bcg, invented clusters", y, v, X, cl, ["intercept", "ablat"])
    res["source"] = source
    with open(os.path.join(outdir, "multilevel_bcg.json"), "w") as fh:
        json.dump(res, fh, indent=1)
    # Seeded simulation: 30 clusters of 1-5 effects, a between- and a within-cluster moderator.
    rng = np.random.default_rng(20261201)
    y, v, X, cl, out_rows = [], [], [], [], []
    for j in range(30):
        n = int(rng.integers(1, 6))
        xb = round(float(rng.normal(0, 1)), 3)
        u = rng.normal(0, math.sqrt(0.05))
        for i in range(n):
            xw = round(float(rng.uniform(0, 2)), 3)
            vi = round(float(rng.uniform(0.01, 0.08)), 4)
            yi = 0.3 + 0.1 * xb - 0.2 * xw + u + rng.normal(0, math.sqrt(0.03)) \
                + rng.normal(0, math.sqrt(vi))
            yi = round(float(yi), 4)
            y.append(yi)
            v.append(vi)
            X.append([1.0, xb, xw])
            cl.append(f"lab {j + 1:02d}")
            out_rows.append([f"lab {j + 1:02d} effect {i + 1}", cl[-1], yi, vi, xb, xw])
    write_csv(os.path.join(outdir, "sim_clusters.csv"),
              ["study", "lab", "effect", "variance", "x_between", "x_within"], out_rows)
    res = run("simulated, 30 clusters", y, v, X, cl, ["intercept", "x_between", "x_within"])
    res["source"] = source
    with open(os.path.join(outdir, "multilevel_sim.json"), "w") as fh:
        json.dump(res, fh, indent=1)


if __name__ == "__main__":
    main()
