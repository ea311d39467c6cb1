#!/usr/bin/env python3
"""Reference values for `pondus sites --one-stage`: the linear mixed model
with a fixed intercept per site and a random x slope, by REML.

Usage: python one_stage.py OUT_DIR

Writes into OUT_DIR (invented data, simulated here for the test only):
  rows.csv       participant rows (site, x, c, w, y), 24 sites of 2 to 60
                 rows, rows shuffled
  sites.csv      one row per site: site, s (an invented site characteristic)
  moments.csv    the per-site moments table of (x, c, w, x*w, y) that
                 `pondus sql` would return (n, means, population covariances)
  flat.csv       rows (site, x, w, y) of 12 sites whose slopes do not vary
                 (true tau^2 = 0); REML puts tau^2 at 0 exactly
  expected.json  per model: fixed effects, tau^2, sigma^2 and their
                 profile-likelihood intervals (dense numpy REML), and the
                 same fixed effects and variances from statsmodels MixedLM

Models (column names as in pondus's JSON `one_stage`):
  w_cov   y ~ site + x + c + (w - wbar_j) + x (w - wbar_j) + x wbar_j, random x slope
  w_char  y ~ site + x + (w - wbar_j) + x (w - wbar_j) + x wbar_j + x s_j, random x slope
  flat    y ~ site + x + (w - wbar_j) + x (w - wbar_j) + x wbar_j on flat.csv

Two routes, both independent of pondus's sufficient-statistics code:
  1. dense: the restricted log-likelihood written from its definition
     (Patterson & Thompson 1971; Harville 1977, JASA 72:320, eq. 2.8) with
     the full design X (site dummies and the within-site predictors) and each
     site's covariance block V_j = sigma^2 I + tau^2 x_j x_j' as a dense
     matrix (numpy.linalg.slogdet / solve), no Sherman-Morrison:
       -2 l_R = log det V + log det X'V^-1 X + r'V^-1 r,  r = y - X b(V)
     maximised over (gamma = tau^2/sigma^2, sigma^2) with sigma^2 profiled
     in closed form, gamma by scipy.optimize.minimize_scalar (bounded) after
     a grid; gamma = 0 when the grid's best point is 0 and the criterion
     rises from 0. SEs from (X'V^-1 X)^-1. Profile-likelihood intervals:
     the profile -2 l_R (the other variance minimised by minimize_scalar)
     crosses its minimum + chi2_1(0.95) (scipy.optimize.brentq).
  2. statsmodels 0.14.6 MixedLM (REML, re_formula "0 + x", the site
     dummies as fixed effects), fitted with tight tolerances; its fixed
     effects, SEs, cov_re (tau^2) and scale (sigma^2) are recorded and
     asserted to agree with the dense route (1e-5 relative on estimates and
     variances; 5% on SEs, which statsmodels takes from the inverse
     Hessian of the whole REML log-likelihood rather than (X'V^-1 X)^-1:
     up to about 1% apart on these data, recorded as se_rel_diff) for the models with tau^2 > 0.
"""

import csv
import json
import os
import sys
import warnings

import numpy as np
import pandas as pd
import scipy
import statsmodels
import statsmodels.formula.api as smf
from scipy import optimize, stats

SEED = 20261203
# flat.csv's own seed: 1, the first tried, gives tau^2 = 0 (asserted below).
FLAT_SEED = 1
LEVEL = 0.95


def simulate(rng):
    sizes = [2, 5, 8, 12, 15, 20, 25, 30, 35, 40, 45, 50, 55, 60,
             18, 22, 28, 33, 9, 14, 26, 38, 47, 11]
    rows, table = [], []
    for j, n in enumerate(sizes):
        site = f"site {j + 1:02d}"
        wbar = rng.normal(0.5, 1.0)
        s = round(float(rng.uniform(0, 4)), 2)
        x = rng.normal(1.0 + 0.1 * j, 1.0, n)
        w = wbar + rng.normal(0, 1.2, n)
        c = rng.normal(0, 1, n)
        u = rng.normal(0, 0.35)
        alpha = rng.normal(2.0, 1.0)
        wm = w.mean()
        y = (alpha + (0.5 + u) * x + 0.2 * (w - wm) + 0.25 * x * (w - wm)
             + 0.1 * x * wm + 0.05 * x * s + 0.3 * c + rng.normal(0, 1.0, n))
        for i in range(n):
            rows.append([site] + [round(float(v), 6) for v in (x[i], c[i], w[i], y[i])])
        table.append([site, s])
    order = rng.permutation(len(rows))
    return [rows[i] for i in order], table


def simulate_flat(rng):
    rows = []
    for j in range(12):
        n = int(rng.integers(15, 40))
        x = rng.normal(0, 1, n)
        w = rng.normal(rng.normal(0, 1), 1, n)
        y = rng.normal(0, 1) + 0.4 * x + 0.2 * w + rng.normal(0, 1, n)
        for i in range(n):
            rows.append([f"f{j + 1}"] + [round(float(v), 6) for v in (x[i], w[i], y[i])])
    return rows


def design(df, covariates, chars):
    """Within-site predictors in pondus's order and the site dummies."""
    wbar = df.groupby("site")["w"].transform("mean")
    cols = {"slope": df["x"]}
    for c in covariates:
        cols[c] = df[c]
    cols["w_within"] = df["w"] - wbar
    cols["within_interaction"] = df["x"] * (df["w"] - wbar)
    cols["across_interaction"] = df["x"] * wbar
    for c in chars:
        cols["x_" + c] = df["x"] * df[c]
    Z = pd.DataFrame(cols)
    D = pd.get_dummies(df["site"], dtype=float)
    return Z, D


class Dense:
    """The restricted likelihood from dense per-site covariance blocks."""

    def __init__(self, df, Z, D):
        self.sites = list(D.columns)
        X = np.column_stack([D.to_numpy(), Z.to_numpy()])
        self.blocks = []
        for s in self.sites:
            idx = (df["site"] == s).to_numpy()
            self.blocks.append((X[idx], df["y"].to_numpy()[idx], df["x"].to_numpy()[idx]))
        self.n, self.p = X.shape
        self.nz = Z.shape[1]

    def pieces(self, gamma):
        """X'V1^-1 X, X'V1^-1 y, y'V1^-1 y and log det V1 with V1 = I + gamma x x'."""
        xtx = np.zeros((self.p, self.p))
        xty = np.zeros(self.p)
        yty = 0.0
        logdet = 0.0
        for X, y, x in self.blocks:
            V = np.eye(len(y)) + gamma * np.outer(x, x)
            Vi_X = np.linalg.solve(V, X)
            Vi_y = np.linalg.solve(V, y)
            xtx += X.T @ Vi_X
            xty += X.T @ Vi_y
            yty += y @ Vi_y
            logdet += np.linalg.slogdet(V)[1]
        return xtx, xty, yty, logdet

    def full(self, gamma, sigma2):
        """-2 l_R(gamma, sigma^2) without constants."""
        xtx, xty, yty, logdet = self.pieces(gamma)
        b = np.linalg.solve(xtx, xty)
        rss = yty - xty @ b
        nu = self.n - self.p
        return (self.n * np.log(sigma2) + logdet
                + np.linalg.slogdet(xtx)[1] - self.p * np.log(sigma2) + rss / sigma2)

    def rss(self, gamma):
        xtx, xty, yty, _ = self.pieces(gamma)
        return yty - xty @ np.linalg.solve(xtx, xty)

    def profiled(self, gamma):
        nu = self.n - self.p
        return self.full(gamma, self.rss(gamma) / nu)

    def argmin_gamma(self, f, hi):
        grid = np.concatenate([[0.0], np.geomspace(1e-6, hi, 60)])
        vals = [f(g) for g in grid]
        i = int(np.argmin(vals))
        if i == len(grid) - 1:
            raise RuntimeError("optimum beyond the grid")
        if i == 0 and f(1e-10) >= vals[0]:
            return 0.0
        lo, up = (grid[i - 1] if i > 0 else 0.0), grid[i + 1]
        r = optimize.minimize_scalar(f, bounds=(lo, up), method="bounded",
                                     options={"xatol": 1e-13 * max(up, 1e-300), "maxiter": 2000})
        return float(r.x) if r.fun <= vals[i] else float(grid[i])

    def fit(self):
        scale = np.mean([np.sum((x - x.mean()) ** 2) for _, _, x in self.blocks])
        gamma = self.argmin_gamma(self.profiled, 1e6 / scale)
        nu = self.n - self.p
        sigma2 = self.rss(gamma) / nu
        xtx, xty, _, _ = self.pieces(gamma)
        b = np.linalg.solve(xtx, xty)
        cov = sigma2 * np.linalg.inv(xtx)
        crit = self.profiled(gamma)
        cut = stats.chi2.ppf(LEVEL, 1)

        def prof_tau(t):
            if t <= 0:
                return self.profiled(0.0)
            g = lambda u: self.full(t / np.exp(u), np.exp(u))
            c = np.log(sigma2)
            r = optimize.minimize_scalar(g, bounds=(c - 5, c + 5), method="bounded",
                                         options={"xatol": 1e-12})
            return r.fun

        def prof_sig(s):
            f = lambda g: self.full(g, s)
            g = self.argmin_gamma(f, 1e6 / scale)
            return min(f(g), f(0.0))

        tau2 = gamma * sigma2
        h = lambda t: prof_tau(t) - crit - cut
        tau_lo = 0.0 if tau2 == 0 or h(0.0) <= 0 else optimize.brentq(h, 0.0, tau2, xtol=1e-14, rtol=1e-12)
        hi = max(tau2, sigma2 / scale) * 2
        while h(hi) <= 0:
            hi *= 2
        tau_hi = optimize.brentq(h, tau2, hi, xtol=1e-14, rtol=1e-12)
        hs = lambda s: prof_sig(s) - crit - cut
        lo = sigma2 / 2
        while hs(lo) <= 0:
            lo /= 2
        sig_lo = optimize.brentq(hs, lo, sigma2, xtol=1e-14, rtol=1e-12)
        hi = sigma2 * 2
        while hs(hi) <= 0:
            hi *= 2
        sig_hi = optimize.brentq(hs, sigma2, hi, xtol=1e-14, rtol=1e-12)
        k = len(self.sites)
        fixed = {}
        return {
            "beta": b[k:], "se": np.sqrt(np.diag(cov))[k:],
            "tau2": tau2, "sigma2": sigma2,
            "tau2_ci": [tau_lo, tau_hi], "sigma2_ci": [sig_lo, sig_hi],
            "gamma": gamma,
        }


def statsmodels_fit(df, Z, covariates, chars):
    data = pd.concat([df[["site", "x", "y"]].reset_index(drop=True), Z.add_prefix("z_").reset_index(drop=True)], axis=1)
    terms = " + ".join(["C(site)"] + [c for c in data.columns if c.startswith("z_")])
    model = smf.mixedlm("y ~ 0 + " + terms, data, groups=data["site"], re_formula="0 + x")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = model.fit(reml=True, method=["bfgs"], gtol=1e-8, maxiter=5000)
    names = ["z_" + c for c in Z.columns]
    return {
        "beta": [float(res.fe_params[n]) for n in names],
        "se": [float(res.bse_fe[n]) for n in names],
        "tau2": float(np.asarray(res.cov_re)[0, 0]),
        "sigma2": float(res.scale),
        "converged": bool(res.converged),
    }


def moments_table(df, cols):
    out = []
    for site, g in df.groupby("site", sort=False):
        v = np.column_stack([g[c].to_numpy() for c in cols])
        cov = np.cov(v.T, ddof=0)
        row = [site, len(g)] + [repr(float(m)) for m in v.mean(axis=0)]
        for i in range(len(cols)):
            for j in range(i, len(cols)):
                row.append(repr(float(cov[i, j])))
        out.append(row)
    return out


def model(df, covariates, chars, with_sm=True):
    Z, D = design(df, covariates, chars)
    dense = Dense(df, Z, D).fit()
    entry = {
        "terms": list(Z.columns), "sites": int(df["site"].nunique()), "rows": int(len(df)),
        "dense": {
            "estimate": [float(v) for v in dense["beta"]], "se": [float(v) for v in dense["se"]],
            "tau2": float(dense["tau2"]), "sigma2": float(dense["sigma2"]),
            "tau2_ci": [float(v) for v in dense["tau2_ci"]],
            "sigma2_ci": [float(v) for v in dense["sigma2_ci"]],
        },
    }
    if with_sm:
        sm = statsmodels_fit(df, Z, covariates, chars)
        assert sm["converged"], "statsmodels did not converge"
        for a, b in zip(sm["beta"], dense["beta"]):
            assert abs(a - b) <= 1e-5 * max(1, abs(b)), (a, b)
        # statsmodels' SEs come from the inverse Hessian of the whole REML
        # log-likelihood (the variance parameters' cross terms included);
        # pondus and the dense route use (X'V^-1 X)^-1 at the REML
        # variances. They differ by up to about 1% here (most for the
        # across-site term, whose estimate is correlated with tau^2's);
        # recorded as se_rel_diff and only checked loosely.
        sm["se_rel_diff"] = [float(a / b - 1) for a, b in zip(sm["se"], dense["se"])]
        for a, b in zip(sm["se"], dense["se"]):
            assert abs(a - b) <= 0.05 * b, (a, b)
        for key in ("tau2", "sigma2"):
            assert abs(sm[key] - dense[key]) <= 1e-5 * dense[key], (key, sm[key], dense[key])
        entry["statsmodels"] = sm
    return entry


def main(out):
    os.makedirs(out, exist_ok=True)
    rng = np.random.default_rng(SEED)
    rows, table = simulate(rng)
    with open(os.path.join(out, "rows.csv"), "w", newline="") as f:
        wr = csv.writer(f, lineterminator="\n")
        wr.writerow(["site", "x", "c", "w", "y"])
        wr.writerows([[r[0]] + [repr(v) for v in r[1:]] for r in rows])
    with open(os.path.join(out, "sites.csv"), "w", newline="") as f:
        wr = csv.writer(f, lineterminator="\n")
        wr.writerow(["site", "s"])
        wr.writerows(table)
    flat = simulate_flat(np.random.default_rng(FLAT_SEED))
    with open(os.path.join(out, "flat.csv"), "w", newline="") as f:
        wr = csv.writer(f, lineterminator="\n")
        wr.writerow(["site", "x", "w", "y"])
        wr.writerows([[r[0]] + [repr(v) for v in r[1:]] for r in flat])
    # Read back what was written, so every route sees the same doubles.
    df = pd.read_csv(os.path.join(out, "rows.csv"), dtype={"site": str})
    sites = pd.read_csv(os.path.join(out, "sites.csv"), dtype={"site": str})
    df = df.merge(sites, on="site", how="left")
    df["xw"] = df["x"] * df["w"]
    with open(os.path.join(out, "moments.csv"), "w", newline="") as f:
        wr = csv.writer(f, lineterminator="\n")
        names = ["x", "c1", "w", "xw", "y"]
        header = ["site", "n"] + [f"mean_{n}" for n in names]
        header += [f"cov_{names[i]}_{names[j]}" for i in range(5) for j in range(i, 5)]
        wr.writerow(header)
        wr.writerows(moments_table(df, ["x", "c", "w", "xw", "y"]))
    fl = pd.read_csv(os.path.join(out, "flat.csv"), dtype={"site": str})
    result = {
        "source": {
            "generator": "tests/reference/one_stage.py",
            "python": sys.version.split()[0],
            "libraries": {"numpy": np.__version__, "scipy": scipy.__version__,
                          "statsmodels": statsmodels.__version__, "pandas": pd.__version__},
            "data": "invented: simulated with numpy.random.default_rng(%d), flat.csv with default_rng(%d)" % (SEED, FLAT_SEED),
        },
        "level": LEVEL,
        "models": {
            "w_cov": model(df, ["c"], []),
            "w_char": model(df, [], ["s"]),
            "flat": model(fl, [], [], with_sm=False),
        },
    }
    flat_fit = result["models"]["flat"]["dense"]
    assert flat_fit["tau2"] == 0.0, "flat.csv: the reference should put tau^2 at 0"
    with open(os.path.join(out, "expected.json"), "w") as f:
        json.dump(result, f, indent=1)
    print("one_stage.py: numpy %s, scipy %s, statsmodels %s" % (np.__version__, scipy.__version__, statsmodels.__version__))


if __name__ == "__main__":
    if len(sys.argv) != 2:
        sys.exit("usage: one_stage.py OUT_DIR")
    main(sys.argv[1])
