#!/usr/bin/env python3
"""Independent reference values for `pondus fit --selection` and the PET and
PEESE regressions of `--small-study`.

Usage: python selection.py OUTDIR

Writes into OUTDIR:
- selection_invented.csv: an INVENTED data set (for tests only) of 60 studies
  drawn with numpy's seeded generator from a random-effects meta-regression
  (true intercept 0.15, slope 0.10 per unit of the moderator `dose`,
  tau^2 = 0.02) and then thinned by publication selection: every study with
  one-sided p < 0.025 is kept, the others with probability 0.35;
- selection_invented.json and selection_bcg.json: the reference values.

The open published data set is the BCG vaccine trials (Colditz et al. 1994,
JAMA 271:698; the 13 trials as tabulated in tests/data/reference/bcg.csv),
analysed as log risk ratios with the favoured direction negative (the
vaccine lowers the risk).

What is computed here, sharing no code with pondus:
- the step-function selection model of Vevea & Hedges (1995, Psychometrika
  60:419): the log-likelihood is written from the published definition
  (density of y_i under N(x_i'b, v_i + tau^2) times the weight of the
  interval of its one-sided p-value, divided by the weighted probability of
  the intervals), maximised with scipy.optimize.minimize from several
  starting points (L-BFGS-B with tau^2 >= 0, then a Nelder-Mead polish),
  the best maximum kept; standard errors from the inverse of the numerical
  Hessian (statsmodels.tools.numdiff.approx_hess3) of the negative
  log-likelihood in (b, tau^2, log w);
- the same model with every weight 1 (the likelihood-ratio test);
- PET and PEESE with statsmodels WLS (weights 1/v, whose scale is the
  multiplicative dispersion Q/(k - p - 1)), t intervals on k - p - 1 df.

Values found by the optimiser are under keys containing "selection_ml",
which compare.py compares to 1e-6 relative (the optimiser's stopping
tolerance), not 1e-9.
"""

import csv
import json
import math
import os
import platform
import sys

import numpy as np
import scipy
import statsmodels
import statsmodels.api as sm
from scipy import optimize, stats
from statsmodels.tools.numdiff import approx_hess3

HERE = os.path.dirname(os.path.abspath(__file__))
BCG = os.path.join(HERE, "..", "data", "reference", "bcg.csv")


def invented():
    rng = np.random.default_rng(20261202)
    rows = []
    i = 0
    while len(rows) < 60:
        i += 1
        n = int(rng.integers(20, 300))
        v = 4.0 / n
        dose = float(np.round(rng.uniform(0.0, 4.0), 1))
        theta = 0.15 + 0.10 * dose + rng.normal(0.0, math.sqrt(0.02))
        y = theta + rng.normal(0.0, math.sqrt(v))
        p = stats.norm.sf(y / math.sqrt(v))
        if p < 0.025 or rng.uniform() < 0.35:
            rows.append((f"study {i}", round(y, 4), round(v, 6), dose))
    return rows


def bcg():
    ys, vs, ablat = [], [], []
    with open(BCG, newline="") as f:
        for r in csv.DictReader(f):
            a, n1 = float(r["treat_events"]), float(r["treat_n"])
            c, n2 = float(r["ctrl_events"]), float(r["ctrl_n"])
            ys.append(math.log((a / n1) / (c / n2)))
            vs.append(1 / a - 1 / n1 + 1 / c - 1 / n2)
            ablat.append(float(r["ablat"]))
    return np.array(ys), np.array(vs), np.array(ablat)


def negloglik(par, y, v, X, cuts, fixed_weights):
    p = X.shape[1]
    b = par[:p]
    t2 = par[p]
    if t2 < 0:
        return np.inf
    w = np.ones(len(cuts) + 1)
    if not fixed_weights:
        w[1:] = np.exp(par[p + 1:])
    mu = X @ b
    s = np.sqrt(v + t2)
    pv = stats.norm.sf(y / np.sqrt(v))
    j = np.searchsorted(np.asarray(cuts), pv, side="right")
    # Probability of each p interval: the effect between the bounds
    # sqrt(v) * z_{1 - c}, from the largest effects down.
    edges = [np.inf] + [np.sqrt(v) * stats.norm.isf(c) for c in cuts] + [-np.inf]
    A = np.zeros_like(y)
    for m in range(len(cuts) + 1):
        hi, lo = edges[m], edges[m + 1]
        prob = stats.norm.cdf((hi - mu) / s) - stats.norm.cdf((lo - mu) / s)
        A += w[m] * prob
    ll = stats.norm.logpdf(y, mu, s) + np.log(w[j]) - np.log(A)
    return -float(np.sum(ll))


def fit(y, v, X, cuts, fixed_weights):
    p = X.shape[1]
    nw = 0 if fixed_weights else len(cuts)
    b0 = np.linalg.lstsq(X / np.sqrt(v)[:, None], y / np.sqrt(v), rcond=None)[0]
    best = None
    for t2 in (0.0, 0.01, 0.1):
        for eta in (0.0, -1.0, 1.0):
            x0 = np.concatenate([b0, [t2], np.full(nw, eta)])
            f = lambda par: negloglik(par, y, v, X, cuts, fixed_weights)
            bounds = [(None, None)] * p + [(0.0, None)] + [(-15, 15)] * nw
            r = optimize.minimize(f, x0, method="L-BFGS-B", bounds=bounds,
                                  options={"ftol": 1e-15, "gtol": 1e-10, "maxiter": 10000})
            r2 = optimize.minimize(f, r.x, method="Nelder-Mead",
                                   options={"xatol": 1e-11, "fatol": 1e-14,
                                            "maxiter": 200000, "maxfev": 200000})
            x = r2.x if r2.fun <= r.fun else r.x
            x[p] = max(x[p], 0.0)
            val = f(x)
            if best is None or val < best[1]:
                best = (x, val)
    x, val = best
    at_zero = x[p] < 1e-8
    keep = [i for i in range(len(x)) if not (i == p and at_zero)]

    def g(sub):
        full = x.copy()
        full[keep] = sub
        return negloglik(full, y, v, X, cuts, fixed_weights)

    H = approx_hess3(x[keep], g)
    cov = np.linalg.inv(H)
    se = np.full(len(x), np.nan)
    se[keep] = np.sqrt(np.diag(cov))
    return x, se, -val, at_zero


def precision(y, v, X, kind):
    extra = np.sqrt(v) if kind == "pet" else v
    Z = np.column_stack([X, extra])
    res = sm.WLS(y, Z, weights=1 / v).fit()
    ci = res.conf_int(0.05)
    out = {}
    for name, j in (("intercept", 0), ("slope", Z.shape[1] - 1)):
        out[name] = {"estimate": float(res.params[j]), "se": float(res.bse[j]),
                     "ci_low": float(ci[j][0]), "ci_high": float(ci[j][1]),
                     "statistic": float(res.tvalues[j]), "df": float(res.df_resid),
                     "p": float(res.pvalues[j])}
    out["moderators"] = [float(res.params[j]) for j in range(1, X.shape[1])]
    return out


def case(y, v, X, cuts, sign, terms):
    ys = sign * y
    x, se, ll, at_zero = fit(ys, v, X, cuts, False)
    x0, _, ll0, _ = fit(ys, v, X, cuts, True)
    p = X.shape[1]
    lr = max(0.0, 2 * (ll - ll0))
    pv = stats.norm.sf(ys / np.sqrt(v))
    counts = np.bincount(np.searchsorted(np.asarray(cuts), pv, side="right"),
                         minlength=len(cuts) + 1)
    return {
        "cuts": list(cuts),
        "terms": terms,
        "studies": [int(c) for c in counts],
        "selection_ml": {
            "coefficients": [float(sign * x[i]) for i in range(p)],
            "coefficient_se": [float(se[i]) for i in range(p)],
            "tau2": float(x[p]),
            "tau2_se": None if at_zero else float(se[p]),
            "weights": [1.0] + [float(math.exp(e)) for e in x[p + 1:]],
            "weight_se": [None] + [float(math.exp(x[p + 1 + m]) * se[p + 1 + m])
                                   for m in range(len(cuts))],
            "log_likelihood": float(ll),
            "log_likelihood_unselected": float(ll0),
            "lr_statistic": float(lr),
            "lr_p": float(stats.chi2.sf(lr, len(cuts))),
        },
    }


def main(outdir):
    os.makedirs(outdir, exist_ok=True)
    source = {"python": platform.python_version(), "numpy": np.__version__,
              "scipy": scipy.__version__, "statsmodels": statsmodels.__version__}
    rows = invented()
    with open(os.path.join(outdir, "selection_invented.csv"), "w", newline="") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(["study", "effect", "variance", "dose"])
        w.writerows(rows)
    y = np.array([r[1] for r in rows])
    v = np.array([r[2] for r in rows])
    dose = np.array([r[3] for r in rows])
    one = np.ones((len(y), 1))
    withdose = np.column_stack([one, dose])
    inv = {
        "source": source,
        "favoured": "positive",
        "cases": [
            case(y, v, one, [0.025], 1.0, ["intercept"]),
            case(y, v, one, [0.025, 0.5], 1.0, ["intercept"]),
            case(y, v, withdose, [0.025], 1.0, ["intercept", "dose"]),
        ],
        "pet": precision(y, v, one, "pet"),
        "peese": precision(y, v, one, "peese"),
        "pet_dose": precision(y, v, withdose, "pet"),
        "peese_dose": precision(y, v, withdose, "peese"),
    }
    with open(os.path.join(outdir, "selection_invented.json"), "w") as f:
        json.dump(inv, f, indent=1)
    y, v, ablat = bcg()
    one = np.ones((len(y), 1))
    withlat = np.column_stack([one, ablat])
    out = {
        "source": source,
        "favoured": "negative",
        "cases": [
            case(y, v, one, [0.025], -1.0, ["intercept"]),
            case(y, v, withlat, [0.025], -1.0, ["intercept", "ablat"]),
        ],
        "pet": precision(y, v, one, "pet"),
        "peese": precision(y, v, one, "peese"),
        "pet_ablat": precision(y, v, withlat, "pet"),
        "peese_ablat": precision(y, v, withlat, "peese"),
    }
    with open(os.path.join(outdir, "selection_bcg.json"), "w") as f:
        json.dump(out, f, indent=1)


if __name__ == "__main__":
    if len(sys.argv) != 2:
        sys.exit(__doc__)
    main(sys.argv[1])
