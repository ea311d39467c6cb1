#!/usr/bin/env python3
"""Independent reference values for the robustness diagnostics of `pondus fit`.

Usage: python diagnose.py OUTDIR

Writes diagnose_bcg.json, diagnose_sim_k20.json, diagnose_sim_k8.json,
diagnose_tiny.json and the invented data file diagnose_tiny.csv into OUTDIR.
The data are read from the committed CSV files of tests/data/reference/
(bcg.csv, sim_k20.csv, sim_k8_boundary.csv, made by generate.py); this
script shares no code with generate.py or with pondus.

What is computed, each by its own route here:
- the random-effects model (REML by a root of the restricted score with
  scipy.optimize.brentq, DerSimonian-Laird in closed form), Knapp-Hartung
  or z inference;
- leave-one-out refits with the conclusions each removal reverses (the
  moderator test crossing alpha, a coefficient's interval starting or
  ceasing to exclude 0) and the average of the intercept-only refit;
- the influence view: shifts of the average and of each coefficient, the
  standardised deleted residual (Viechtbauer & Cheung 2010, Research
  Synthesis Methods 1:112; formulas cited from memory), the leverage and
  the flags with textbook cut-offs (Belsley, Kuh & Welsch 1980; Cook &
  Weisberg 1982; Hoaglin & Welsch 1978);
- the regression test for funnel-plot asymmetry (Egger et al. 1997, BMJ
  315:629) with statsmodels WLS (whose scale is the multiplicative
  dispersion), with and without the moderators;
- the rank-correlation test (Begg & Mazumdar 1994) with
  scipy.stats.kendalltau(method="asymptotic") on the variance-standardised
  deviates and the sampling variances;
- trim-and-fill with the L0 estimator (Duval & Tweedie 2000), implemented
  here from the published description;
- cumulative meta-analysis;
- the permutation p of the moderator test by full enumeration with
  itertools.permutations on a tiny invented data set (720 orderings, and 20
  distinct arrangements of a two-level moderator, each counted with its
  multiplicity, which gives the same share).
"""

import csv
import io
import itertools
import json
import math
import os
import platform
import sys

import numpy as np
import scipy
import scipy.optimize
import scipy.stats
import statsmodels
import statsmodels.api as sm

HERE = os.path.dirname(os.path.abspath(__file__))
DATA = os.path.join(HERE, "..", "data", "reference")
LEVEL = 0.95
ALPHA = 1 - LEVEL


def source_header():
    return {
        "generator": "tests/reference/diagnose.py",
        "python": platform.python_version(),
        "libraries": {"numpy": np.__version__, "scipy": scipy.__version__,
                      "statsmodels": statsmodels.__version__},
    }


def read_csv(path):
    with open(path, newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


# ---------------------------------------------------------------- the model

def wls(y, v, X, t2):
    w = 1.0 / (v + t2)
    M = (X.T * w) @ X
    Minv = np.linalg.inv(M)
    b = Minv @ ((X.T * w) @ y)
    r = y - X @ b
    return w, Minv, b, r


def reml_score(y, v, X, t2):
    w, Minv, b, r = wls(y, v, X, t2)
    trP = np.sum(w) - np.trace(Minv @ ((X.T * w * w) @ X))
    return 0.5 * (np.sum(w * w * r * r) - trP)


def tau2_reml(y, v, X):
    if reml_score(y, v, X, 0.0) <= 0:
        return 0.0
    hi = max(np.var(y), 1e-6)
    while reml_score(y, v, X, hi) > 0:
        hi *= 2
    return scipy.optimize.brentq(lambda t: reml_score(y, v, X, t), 0.0, hi,
                                 xtol=1e-300, rtol=4 * np.finfo(float).eps, maxiter=1000)


def tau2_dl(y, v, X):
    k, p = X.shape
    w, Minv, b, r = wls(y, v, X, 0.0)
    q = np.sum(w * r * r)
    trP = np.sum(w) - np.trace(Minv @ ((X.T * w * w) @ X))
    return max(0.0, (q - (k - p)) / trP)


def fit(y, v, X, method, inference):
    k, p = X.shape
    t2 = tau2_reml(y, v, X) if method == "reml" else tau2_dl(y, v, X)
    w, Minv, b, r = wls(y, v, X, t2)
    df = k - p
    s2 = float(np.sum(w * r * r) / df)
    cov = Minv * s2 if inference == "kh" else Minv
    se = np.sqrt(np.diag(cov))
    stat = b / se
    if inference == "kh":
        pval = 2 * scipy.stats.t.sf(np.abs(stat), df)
        crit = scipy.stats.t.ppf(1 - ALPHA / 2, df)
    else:
        pval = 2 * scipy.stats.norm.sf(np.abs(stat))
        crit = scipy.stats.norm.ppf(1 - ALPHA / 2)
    omni = None
    if p > 1:
        bb = b[1:]
        x2 = float(bb @ np.linalg.solve(cov[1:, 1:], bb))
        m = p - 1
        omni = float(scipy.stats.f.sf(x2 / m, m, df)) if inference == "kh" else float(scipy.stats.chi2.sf(x2, m))
    # residual Q at common-effect weights, typical variance, I^2
    w0, Minv0, b0, r0 = wls(y, v, X, 0.0)
    qe = float(np.sum(w0 * r0 * r0))
    trP0 = np.sum(w0) - np.trace(Minv0 @ ((X.T * w0 * w0) @ X))
    vt = df / trP0
    return {"tau2": float(t2), "beta": b, "minv": Minv, "cov": cov, "se": se, "p": pval,
            "crit": float(crit), "omnibus_p": omni, "q_e": qe, "i2": float(t2 / (t2 + vt)), "w": w}


def design(rows, moderators):
    cols = [np.ones(len(rows))]
    for m in moderators:
        vals = [r[m] for r in rows]
        try:
            cols.append(np.array([float(x) for x in vals]))
        except ValueError:
            levels = sorted(set(vals))
            for lev in levels[1:]:
                cols.append(np.array([1.0 if x == lev else 0.0 for x in vals]))
    return np.column_stack(cols)


# ---------------------------------------------------------------- diagnostics

def excludes_zero(f, j):
    lo = f["beta"][j] - f["crit"] * f["se"][j]
    hi = f["beta"][j] + f["crit"] * f["se"][j]
    return bool(lo > 0 or hi < 0)


def conclusion_changes(full, f, p):
    """The conclusions the refit f reverses: the omnibus moderator test
    crossing alpha, a moderator coefficient's interval starting or ceasing to
    exclude 0 (without moderators: the average's interval)."""
    out = []
    if p > 1:
        a, b = bool(full["omnibus_p"] < ALPHA), bool(f["omnibus_p"] < ALPHA)
        if a != b:
            out.append({"kind": "moderator_test", "coefficient": None,
                        "significant_with": a, "significant_without": b})
        for j in range(1, p):
            a, b = excludes_zero(full, j), excludes_zero(f, j)
            if a != b:
                out.append({"kind": "coefficient", "coefficient": j,
                            "significant_with": a, "significant_without": b})
    else:
        a, b = excludes_zero(full, 0), excludes_zero(f, 0)
        if a != b:
            out.append({"kind": "average", "coefficient": None,
                        "significant_with": a, "significant_without": b})
    return out


def leave_one_out(y, v, X, method, inference, full):
    k, p = X.shape
    out = []
    tested = (lambda f: f["omnibus_p"]) if p > 1 else (lambda f: float(f["p"][0]))
    for i in range(k):
        keep = [j for j in range(k) if j != i]
        f = fit(y[keep], v[keep], X[keep], method, inference)
        avg = fit(y[keep], v[keep], np.ones((k - 1, 1)), method, inference)
        pi = tested(f)
        out.append({
            "coefficients": [float(x) for x in f["beta"]],
            "average": float(avg["beta"][0]),
            "tau2": f["tau2"], "i2": f["i2"],
            "moderator_p": pi if p > 1 else None,
            "average_p": pi if p == 1 else None,
            "changes": conclusion_changes(full, f, p),
        })
    return out


def influence(y, v, X, method, inference, full):
    """The influence view: shifts of the average and of each coefficient
    when a study is left out, the moderator test's p without it, the
    conclusions it reverses, the standardised deleted residual (mixed-model
    form of Viechtbauer & Cheung 2010, from memory), the leverage and the
    flags with the textbook cut-offs: 2/sqrt(k) standard errors (Belsley,
    Kuh & Welsch 1980), the Bonferroni outlier bound z at 1 - alpha/(2k)
    (Cook & Weisberg 1982), leverage 2p/k (Hoaglin & Welsch 1978)."""
    k, p = X.shape
    V = full["minv"]
    ones = np.ones((k, 1))
    mu = float(fit(y, v, ones, method, inference)["beta"][0])
    rules = {"coefficient_shift_se": 2 / math.sqrt(k),
             "deleted_residual": float(scipy.stats.norm.ppf(1 - ALPHA / (2 * k))),
             "leverage": 2 * p / k, "average": mu, "moderator_p": full["omnibus_p"]}
    moved = range(1, p) if p > 1 else [0]
    rows = []
    for i in range(k):
        keep = [j for j in range(k) if j != i]
        f = fit(y[keep], v[keep], X[keep], method, inference)
        avg = float(fit(y[keep], v[keep], ones[keep], method, inference)["beta"][0])
        xi = X[i]
        h = float(xi @ V @ xi / (v[i] + full["tau2"]))
        Vd = f["minv"]
        rst = (y[i] - float(xi @ f["beta"])) / math.sqrt(v[i] + f["tau2"] + xi @ Vd @ xi)
        shifts = f["beta"] - full["beta"]
        shifts_se = shifts / full["se"]
        changes = conclusion_changes(full, f, p)
        flags = []
        if changes:
            flags.append("changes_conclusion")
        if any(abs(shifts_se[j]) > rules["coefficient_shift_se"] for j in moved):
            flags.append("moves_coefficient")
        if abs(rst) > rules["deleted_residual"]:
            flags.append("unusual_effect")
        if h > rules["leverage"]:
            flags.append("high_leverage")
        rows.append({"average_without": avg, "average_shift": avg - mu,
                     "coefficient_shifts": [float(x) for x in shifts],
                     "coefficient_shifts_se": [float(x) for x in shifts_se],
                     "moderator_p_without": f["omnibus_p"], "changes": changes,
                     "deleted_residual": float(rst), "leverage": h, "flags": flags})
    return rows, rules


def egger(y, v, X):
    Z = np.column_stack([X, np.sqrt(v)])
    res = sm.WLS(y, Z, weights=1.0 / v).fit()
    j = Z.shape[1] - 1
    return {"statistic": float(res.tvalues[j]), "df": float(res.df_resid), "p": float(res.pvalues[j]),
            "slope": float(res.params[j]), "se": float(res.bse[j])}


def begg(y, v):
    w = 1.0 / v
    theta = np.sum(w * y) / np.sum(w)
    ts = (y - theta) / np.sqrt(v - 1.0 / np.sum(w))
    r = scipy.stats.kendalltau(ts, v, method="asymptotic")
    return {"tau": float(r.statistic), "p": float(r.pvalue)}


def pooled(y, v, method, inference):
    f = fit(y, v, np.ones((len(y), 1)), method, inference)
    b, se = float(f["beta"][0]), float(f["se"][0])
    return b, b - f["crit"] * se, b + f["crit"] * se


def trim_fill(y, v, method, inference, left):
    """Duval & Tweedie's L0 estimator, iterated; missing studies sought on `left`."""
    k = len(y)
    sign = 1.0 if left else -1.0
    yp = sign * y
    order = sorted(range(k), key=lambda i: -yp[i])  # stable: ties keep file order
    k0, it = 0, 0
    while True:
        it += 1
        keep = order[k0:]
        theta, _, _ = pooled(yp[keep], v[keep], method, inference)
        d = yp - theta
        ranks = scipy.stats.rankdata(np.abs(d))  # average ranks for ties
        t = float(np.sum(ranks[d > 0]))
        l0 = (4 * t - k * (k + 1)) / (2 * k - 1)
        nxt = min(max(0, math.floor(l0 + 0.5)), k - 2)
        if nxt == k0:
            break
        k0 = nxt
    fill = [2 * theta - yp[i] for i in order[:k0]]
    fy = np.concatenate([yp, np.array(fill)])
    fv = np.concatenate([v, v[order[:k0]]])
    est, lo, hi = pooled(fy, fv, method, inference)
    if not left:
        est, lo, hi = -est, -hi, -lo
    obs, _, _ = pooled(y, v, method, inference)
    return {"filled": k0, "side": "left" if left else "right", "estimate": est, "ci_low": lo,
            "ci_high": hi, "estimate_observed": obs, "iterations": it,
            "filled_studies": [{"effect": float(sign * f), "variance": float(v[i])}
                               for f, i in zip(fill, order[:k0])]}


def cumulative(y, v, keys, method, inference):
    order = sorted(range(len(y)), key=lambda i: keys[i])  # stable
    z = scipy.stats.norm.ppf(1 - ALPHA / 2)
    out = []
    for j in range(1, len(y) + 1):
        idx = order[:j]
        if j == 1:
            i = idx[0]
            se = math.sqrt(v[i])
            out.append({"k": 1, "estimate": float(y[i]), "se": se, "ci_low": float(y[i] - z * se),
                        "ci_high": float(y[i] + z * se), "p": float(2 * scipy.stats.norm.sf(abs(y[i]) / se)),
                        "tau2": None, "i2": None, "index": i})
            continue
        f = fit(y[idx], v[idx], np.ones((j, 1)), method, inference)
        b, se = float(f["beta"][0]), float(f["se"][0])
        out.append({"k": j, "estimate": b, "se": se, "ci_low": b - f["crit"] * se, "ci_high": b + f["crit"] * se,
                    "p": float(f["p"][0]), "tau2": f["tau2"], "i2": f["i2"], "index": idx[-1]})
    return out


def run_all(name, rows, y, v, moderators, settings, order_key):
    X = design(rows, moderators)
    runs = []
    for method, inference in settings:
        full = fit(y, v, X, method, inference)
        infl, cut = influence(y, v, X, method, inference, full)
        plain = egger(y, v, np.ones((len(y), 1)))
        run = {
            "method": method, "inference": inference, "moderators": moderators,
            "coefficients": [float(b) for b in full["beta"]],
            "leave_one_out": leave_one_out(y, v, X, method, inference, full),
            "influence": infl, "influence_rules": cut,
            "asymmetry_test": egger(y, v, X),
            "rank_test": begg(y, v),
            "trim_fill": trim_fill(y, v, method, inference, plain["slope"] > 0),
        }
        if order_key is not None:
            keys = [r[order_key] for r in rows]
            try:
                keys = [float(x) for x in keys]
            except ValueError:
                pass
            run["cumulative_by"] = order_key
            run["cumulative"] = cumulative(y, v, keys, method, inference)
        runs.append(run)
    return {"source": source_header(), "dataset": name, "level": LEVEL, "runs": runs}


# ---------------------------------------------------------------- permutation

TINY_CSV = """study,effect,variance,dose,arm
T1,0.12,0.020,1.0,a
T2,0.35,0.050,2.5,b
T3,0.05,0.030,3.0,a
T4,0.60,0.080,4.5,b
T5,0.41,0.025,5.0,a
T6,0.72,0.060,7.0,b
"""


def omnibus_stat(y, v, X, method, inference):
    f = fit(y, v, X, method, inference)
    b = f["beta"][1:]
    x2 = float(b @ np.linalg.solve(f["cov"][1:, 1:], b))
    stat = x2 / (X.shape[1] - 1) if inference == "kh" else x2
    return stat, np.abs(f["beta"] / f["se"])


def exact_permutation(y, v, X, method, inference):
    """Every ordering of the moderator rows (k! of them, duplicates included)."""
    obs, obs_c = omnibus_stat(y, v, X, method, inference)
    k = len(y)
    n = b = 0
    bc = np.zeros(X.shape[1])
    for perm in itertools.permutations(range(k)):
        s, c = omnibus_stat(y, v, X[list(perm)], method, inference)
        n += 1
        b += s >= obs * (1 - 1e-10)
        bc += c >= obs_c * (1 - 1e-10)
    return {"moderator_p": b / n, "coefficient_p": [None] + [float(x / n) for x in bc[1:]], "orderings": n}


def tiny():
    rows = list(csv.DictReader(io.StringIO(TINY_CSV)))
    y = np.array([float(r["effect"]) for r in rows])
    v = np.array([float(r["variance"]) for r in rows])
    runs = []
    for mod, arrangements in (("dose", 720), ("arm", 20)):
        X = design(rows, [mod])
        for method, inference in (("reml", "kh"), ("dl", "z")):
            r = exact_permutation(y, v, X, method, inference)
            runs.append({"moderator": mod, "method": method, "inference": inference,
                         "arrangements": arrangements, **r})
    return {"source": source_header(), "dataset": "tiny (invented, for this check only)", "runs": runs}


def main():
    if len(sys.argv) != 2:
        print("usage: diagnose.py OUTDIR", file=sys.stderr)
        return 2
    out = sys.argv[1]
    os.makedirs(out, exist_ok=True)
    files = {}

    rows = read_csv(os.path.join(DATA, "bcg.csv"))
    te = np.array([float(r["treat_events"]) for r in rows])
    tn = np.array([float(r["treat_n"]) for r in rows])
    ce = np.array([float(r["ctrl_events"]) for r in rows])
    cn = np.array([float(r["ctrl_n"]) for r in rows])
    y = np.log((te / tn) / (ce / cn))
    v = 1 / te - 1 / tn + 1 / ce - 1 / cn
    files["diagnose_bcg.json"] = run_all("bcg (log risk ratio)", rows, y, v, ["ablat"],
                                         [("reml", "kh"), ("reml", "z"), ("dl", "z")], "year")
    files["diagnose_bcg_plain.json"] = run_all("bcg (log risk ratio), no moderators", rows, y, v, [],
                                               [("reml", "kh")], "year")

    rows = read_csv(os.path.join(DATA, "sim_k20.csv"))
    y = np.array([float(r["effect"]) for r in rows])
    v = np.array([float(r["variance"]) for r in rows])
    files["diagnose_sim_k20.json"] = run_all("sim_k20 (invented)", rows, y, v, ["dose", "region"],
                                             [("reml", "kh"), ("dl", "z")], "dose")

    rows = read_csv(os.path.join(DATA, "sim_k8_boundary.csv"))
    y = np.array([float(r["effect"]) for r in rows])
    v = np.array([float(r["variance"]) for r in rows])
    files["diagnose_sim_k8.json"] = run_all("sim_k8_boundary (invented)", rows, y, v, [],
                                            [("reml", "kh"), ("reml", "z")], "study")

    files["diagnose_tiny.json"] = tiny()
    for name, obj in files.items():
        with open(os.path.join(out, name), "w", encoding="utf-8") as fh:
            json.dump(obj, fh, indent=1, sort_keys=True)
            fh.write("\n")
    with open(os.path.join(out, "diagnose_tiny.csv"), "w", encoding="utf-8") as fh:
        fh.write(TINY_CSV)
    return 0


if __name__ == "__main__":
    sys.exit(main())
