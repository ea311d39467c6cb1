"""Independent reference values for heterogeneity as an answer (issue 17).

    python tests/reference/heterogeneity.py OUTDIR

Writes OUTDIR/*.json (and the invented data set spread_k40.csv):

- shrunken (empirical-Bayes) estimates and the chance that a new study's true
  effect exceeds a value (`--shrink`, `--beyond`): REML tau^2 by scipy's
  bounded scalar minimiser on the restricted likelihood, the coefficients and
  (X'WX)^-1 from statsmodels WLS at that tau^2, the shrunken values with
  numpy, the probability with scipy.stats.t / norm;
- every subset of the moderators by ML (`--all-subsets`): the ML tau^2 of each
  subset by scipy, the full log-likelihood, AICc, Akaike weights, importance
  and model-averaged coefficients with Burnham & Anderson's unconditional SE;
- the location-scale model (`--spread-by`): ln tau_i^2 = z_i'alpha, fitted by
  maximising the (restricted) log-likelihood directly with scipy.optimize
  (BFGS on alpha with beta profiled out; for ML also a joint maximisation over
  beta and alpha as a second route), SEs of alpha from a central-difference
  Hessian of the log-likelihood itself, the LR test against one tau^2.

Data: the BCG vaccine trials (Colditz et al. 1994, JAMA 271:698; the 13
trials as tabulated in tests/data/reference/bcg.csv, log risk ratios), the
invented data set sim_k20.csv of generate.py, and an invented data set made
here (spread_k40.csv, seeded), whose true tau^2 differs between two groups.
Nothing here imports pondus or generate.py.
"""

import csv
import io
import json
import math
import os
import platform
import sys
from itertools import combinations

import numpy as np
import scipy
import statsmodels
import statsmodels.api as sm
from scipy import optimize, stats

HERE = os.path.dirname(os.path.abspath(__file__))
DATA = os.path.join(HERE, "..", "data", "reference")
SPREAD_SEED = 20261202
LN2PI = math.log(2 * math.pi)


def header():
    return {
        "generator": "tests/reference/heterogeneity.py",
        "python": platform.python_version(),
        "libraries": {"numpy": np.__version__, "scipy": scipy.__version__,
                      "statsmodels": statsmodels.__version__},
    }


def read_csv(path):
    with open(path, newline="") as f:
        return list(csv.DictReader(f))


def bcg():
    rows = read_csv(os.path.join(DATA, "bcg.csv"))
    y, v = [], []
    for r in rows:
        a, n1, c, n2 = (float(r[k]) for k in ("treat_events", "treat_n", "ctrl_events", "ctrl_n"))
        y.append(math.log((a / n1) / (c / n2)))
        v.append(1 / a - 1 / n1 + 1 / c - 1 / n2)
    cols = {"ablat": [float(r["ablat"]) for r in rows], "year": [float(r["year"]) for r in rows],
            "alloc": [r["alloc"] for r in rows]}
    return np.array(y), np.array(v), cols


def sim_k20():
    rows = read_csv(os.path.join(DATA, "sim_k20.csv"))
    y = np.array([float(r["effect"]) for r in rows])
    v = np.array([float(r["variance"]) for r in rows])
    return y, v, {"dose": [float(r["dose"]) for r in rows], "region": [r["region"] for r in rows]}


def spread_k40(outdir):
    """Invented: 40 studies, group a (tau^2 = 0.02) and b (tau^2 = 0.15),
    a numeric characteristic size_100 unrelated to the spread, mean 0.3 + 0.1 x."""
    rng = np.random.default_rng(SPREAD_SEED)
    k = 40
    group = ["a"] * 20 + ["b"] * 20
    v = np.round(rng.uniform(0.01, 0.12, k), 4)
    x = np.round(rng.uniform(0.0, 4.0, k), 2)
    tau2 = np.where(np.array(group) == "a", 0.02, 0.15)
    y = np.round(0.3 + 0.1 * x + rng.normal(0, np.sqrt(tau2)) + rng.normal(0, np.sqrt(v)), 4)
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["study", "effect", "variance", "size_100", "group"])
    for i in range(k):
        w.writerow([f"s{i + 1:02d}", repr(float(y[i])), repr(float(v[i])), repr(float(x[i])), group[i]])
    with open(os.path.join(outdir, "spread_k40.csv"), "w") as f:
        f.write(buf.getvalue())
    return y, v, {"size_100": [float(t) for t in x], "group": group}


def design(cols, names, k):
    """Intercept, numeric columns as they are, categorical as dummies against the first sorted level."""
    X = [np.ones(k)]
    terms = ["intercept"]
    for n in names:
        c = cols[n]
        if isinstance(c[0], str):
            levels = sorted(set(c))
            for l in levels[1:]:
                X.append(np.array([1.0 if t == l else 0.0 for t in c]))
                terms.append(f"{n}={l}")
        else:
            X.append(np.array(c, dtype=float))
            terms.append(n)
    return np.column_stack(X), terms


# ---------------------------------------------------------------- one tau^2

def gls(y, v, X, tau2):
    """statsmodels WLS at weights 1/(v + tau2): beta and (X'WX)^-1."""
    res = sm.WLS(y, X, weights=1.0 / (v + tau2)).fit()
    return np.asarray(res.params), np.asarray(res.normalized_cov_params)


def loglik(y, v, X, tau2, reml):
    w = 1.0 / (v + tau2)
    XtWX = (X.T * w) @ X
    beta = np.linalg.solve(XtWX, (X.T * w) @ y)
    r = y - X @ beta
    k, p = X.shape
    ll = -0.5 * (np.sum(np.log(v + tau2)) + np.sum(w * r * r))
    if reml:
        ll += -0.5 * np.linalg.slogdet(XtWX)[1] - 0.5 * (k - p) * LN2PI
    else:
        ll += -0.5 * k * LN2PI
    return float(ll)


def tau2_fit(y, v, X, reml):
    hi = 10.0 * max(np.var(y, ddof=1), np.max(v))
    res = optimize.minimize_scalar(lambda t: -loglik(y, v, X, t, reml), bounds=(0.0, hi),
                                   method="bounded", options={"xatol": 1e-13, "maxiter": 2000})
    t = res.x
    # the boundary: compare with tau^2 = 0
    if loglik(y, v, X, 0.0, reml) >= loglik(y, v, X, t, reml):
        t = 0.0
    return float(t)


def shrink_case(name, y, v, cols, mods, inference, beyond, level=0.95):
    k = len(y)
    X, terms = design(cols, mods, k)
    p = X.shape[1]
    t2 = tau2_fit(y, v, X, True)
    beta, C = gls(y, v, X, t2)
    fitted = X @ beta
    B = t2 / (t2 + v)
    est = fitted + B * (y - fitted)
    h = np.einsum("ij,jk,ik->i", X, C, X)
    se = np.sqrt(B * v + (1 - B) ** 2 * h)
    z = stats.norm.ppf(1 - (1 - level) / 2)
    # beyond at the average (intercept-only REML fit), read off the prediction
    # interval's distribution: Higgins, Thompson & Spiegelhalter (2009, JRSS A
    # 172:137), t on k - 2 df (k - p - 1 with p = 1) under every inference,
    # scale sqrt(var + tau^2) with var the unscaled variance of the mean, or the
    # Knapp-Hartung-scaled one when that is larger (never narrower than the CI).
    ones = np.ones((k, 1))
    t0 = tau2_fit(y, v, ones, True)
    b0, C0 = gls(y, v, ones, t0)
    w0 = 1 / (v + t0)
    var0 = float(C0[0, 0])
    if inference == "kh":
        s2 = float(np.sum(w0 * (y - b0[0]) ** 2) / (k - 1))
        var0 = max(var0, s2 * var0)
    df = k - 2
    prob = float(stats.t.sf((beyond - b0[0]) / math.sqrt(var0 + t0), df))
    return {
        "name": name, "moderators": mods, "inference": inference, "tau2": t2,
        "shrunken": [float(x) for x in est], "shrunken_se": [float(x) for x in se],
        "shrunken_low": [float(x) for x in est - z * se], "shrunken_high": [float(x) for x in est + z * se],
        "own_weight": [float(x) for x in B],
        "beyond": {"value": beyond, "df": df, "average": prob},
    }


def subsets_case(name, y, v, cols, mods):
    k = len(y)
    full, terms = design(cols, mods, k)
    # columns of each candidate in the full design
    spans, at = [], 1
    for n in mods:
        w = len(set(cols[n])) - 1 if isinstance(cols[n][0], str) else 1
        spans.append(list(range(at, at + w)))
        at += w
    models = []
    for r in range(len(mods) + 1):
        for members in combinations(range(len(mods)), r):
            columns = [0] + [c for m in members for c in spans[m]]
            X = full[:, columns]
            t2 = tau2_fit(y, v, X, False)
            ll = loglik(y, v, X, t2, False)
            beta, C = gls(y, v, X, t2)
            q = X.shape[1] + 1
            aicc = -2 * ll + 2 * q + 2 * q * (q + 1) / (k - q - 1)
            b = np.zeros(full.shape[1])
            var = np.zeros(full.shape[1])
            b[columns] = beta
            var[columns] = np.diag(C)
            models.append({"terms": [mods[m] for m in members], "members": list(members),
                           "parameters": q, "log_likelihood": ll, "aicc": aicc, "tau2": t2,
                           "beta": b, "var": var})
    best = min(m["aicc"] for m in models)
    tot = sum(math.exp(-(m["aicc"] - best) / 2) for m in models)
    for m in models:
        m["delta"] = m["aicc"] - best
        m["weight"] = math.exp(-m["delta"] / 2) / tot
    models.sort(key=lambda m: m["aicc"])
    imp = [{"moderator": n, "importance": sum(m["weight"] for m in models if j in m["members"])}
           for j, n in enumerate(mods)]
    avg = []
    for j, t in enumerate(terms):
        mean = sum(m["weight"] * m["beta"][j] for m in models)
        se = sum(m["weight"] * math.sqrt(m["var"][j] + (m["beta"][j] - mean) ** 2) for m in models)
        avg.append({"term": t, "estimate": mean, "se": se})
    out_models = [{k2: m[k2] for k2 in ("terms", "parameters", "log_likelihood", "aicc", "delta", "weight")}
                  for m in models]
    # the all-terms model: its ML tau^2 and log-likelihood, to compare with --tau2 ml
    allm = next(m for m in models if len(m["members"]) == len(mods))
    return {"name": name, "moderators": mods, "models": out_models, "importance": imp,
            "averaged": avg, "full_ml": {"tau2": allm["tau2"], "log_likelihood": allm["log_likelihood"]}}


# ---------------------------------------------------------------- location-scale

def ls_loglik(alpha, y, v, X, Z, reml):
    tau2 = np.exp(Z @ alpha)
    w = 1.0 / (v + tau2)
    XtWX = (X.T * w) @ X
    beta = np.linalg.solve(XtWX, (X.T * w) @ y)
    r = y - X @ beta
    k, p = X.shape
    ll = -0.5 * (np.sum(np.log(v + tau2)) + np.sum(w * r * r))
    if reml:
        ll += -0.5 * np.linalg.slogdet(XtWX)[1] - 0.5 * (k - p) * LN2PI
    else:
        ll += -0.5 * k * LN2PI
    return float(ll)


def joint_ml(y, v, X, Z, start):
    """Second route for ML: maximise over (beta, alpha) jointly."""
    p = X.shape[1]

    def nll(th):
        b, a = th[:p], th[p:]
        s = v + np.exp(Z @ a)
        r = y - X @ b
        return 0.5 * float(np.sum(LN2PI + np.log(s) + r * r / s))

    res = optimize.minimize(nll, start, method="BFGS", options={"gtol": 1e-10, "maxiter": 10000})
    return res.x[p:], -res.fun


def hessian(f, x, h=1e-4):
    n = len(x)
    H = np.zeros((n, n))
    for i in range(n):
        for j in range(n):
            ei = np.zeros(n); ej = np.zeros(n)
            ei[i] = h; ej[j] = h
            H[i, j] = (f(x + ei + ej) - f(x + ei - ej) - f(x - ei + ej) + f(x - ei - ej)) / (4 * h * h)
    return H


def spread_case(name, y, v, cols, mods, spread, reml):
    k = len(y)
    X, xterms = design(cols, mods, k)
    Z, zterms = design(cols, spread, k)
    t0 = tau2_fit(y, v, X, reml)
    start = np.zeros(Z.shape[1])
    start[0] = math.log(max(t0, 1e-4))
    f = lambda a: -ls_loglik(a, y, v, X, Z, reml)
    res = optimize.minimize(f, start, method="BFGS", options={"gtol": 1e-10, "maxiter": 10000})
    res = optimize.minimize(f, res.x, method="Nelder-Mead",
                            options={"xatol": 1e-12, "fatol": 1e-14, "maxiter": 40000, "maxfev": 40000})
    res = optimize.minimize(f, res.x, method="BFGS", options={"gtol": 1e-11, "maxiter": 10000})
    alpha = res.x
    ll = -res.fun
    if not reml:
        beta0, _ = gls(y, v, X, t0)
        a2, ll2 = joint_ml(y, v, X, Z, np.concatenate([beta0, start]))
        if not (abs(ll2 - ll) < 1e-7 and np.max(np.abs(a2 - alpha)) < 1e-4):
            sys.exit(f"{name}: the joint ML route disagrees: {a2} {alpha} {ll2} {ll}")
    H = hessian(lambda a: ls_loglik(a, y, v, X, Z, reml), alpha)
    cov_a = np.linalg.inv(-H)
    se_a = np.sqrt(np.diag(cov_a))
    tau2 = np.exp(Z @ alpha)
    res_w = sm.WLS(y, X, weights=1.0 / (v + tau2)).fit()
    beta = np.asarray(res_w.params)
    se_b = np.sqrt(np.diag(np.asarray(res_w.normalized_cov_params)))
    ll0 = loglik(y, v, X, t0, reml)
    lr = 2 * (ll - ll0)
    df = Z.shape[1] - 1
    return {
        "name": name, "moderators": mods, "spread_by": spread, "method": "reml" if reml else "ml",
        "alpha": [{"term": t, "estimate": float(a), "se": float(s)} for t, a, s in zip(zterms, alpha, se_a)],
        "beta": [{"term": t, "estimate": float(b), "se": float(s)} for t, b, s in zip(xterms, beta, se_b)],
        "tau2_each": [float(t) for t in tau2],
        "log_likelihood": ll, "log_likelihood_one_tau2": ll0,
        "test": {"statistic": lr, "df": df, "p": float(stats.chi2.sf(lr, df))},
    }


def fl(o):
    if isinstance(o, dict):
        return {k: fl(v) for k, v in o.items()}
    if isinstance(o, (list, tuple)):
        return [fl(v) for v in o]
    if isinstance(o, (np.floating, float)):
        return float(o)
    if isinstance(o, np.integer):
        return int(o)
    return o


def main():
    out = sys.argv[1]
    os.makedirs(out, exist_ok=True)
    yb, vb, cb = bcg()
    ys, vs, cs = sim_k20()
    yk, vk, ck = spread_k40(out)
    shrink = [
        shrink_case("bcg_ablat_kh", yb, vb, cb, ["ablat"], "kh", math.log(0.6)),
        shrink_case("sim_k20_dose_region_z", ys, vs, cs, ["dose", "region"], "z", 0.4),
    ]
    subsets = [
        subsets_case("bcg_ablat_year_alloc", yb, vb, cb, ["ablat", "year", "alloc"]),
        subsets_case("sim_k20_dose_region", ys, vs, cs, ["dose", "region"]),
    ]
    spread = [
        spread_case("spread_k40_group_reml", yk, vk, ck, ["size_100"], ["group"], True),
        spread_case("spread_k40_group_size_ml", yk, vk, ck, ["size_100"], ["group", "size_100"], False),
        spread_case("bcg_ablat_reml", yb, vb, cb, ["ablat"], ["ablat"], True),
    ]
    for fname, cases in (("shrink.json", shrink), ("subsets.json", subsets), ("spread.json", spread)):
        with open(os.path.join(out, fname), "w") as f:
            json.dump(fl({"source": header(), "cases": cases}), f, indent=1, sort_keys=True)
            f.write("\n")


if __name__ == "__main__":
    main()
