#!/usr/bin/env python3
"""Independent reference values for pondus.

Usage: python generate.py OUTDIR

Writes bcg.json, sim_k20.json, sim_k8_boundary.json, effect_sizes.json and
the data files bcg.csv, sim_k20.csv, sim_k8_boundary.csv into OUTDIR.

Every number in the JSON files is computed here, with numpy/scipy (our own
implementation of the formulas in README.md) and, as a second route where it
has the functionality, statsmodels.  The only typed-in numbers are the data
sets (BCG: transcribed from memory; simulated: generated here with a fixed
seed) and the values labelled "published, from memory", which are only ever
compared with, never used as fixture values.

See README.md in this directory for the layout and provenance of every block.
"""

import csv
import io
import json
import math
import os
import platform
import sys

import numpy as np
import pandas
import scipy
import statsmodels
from scipy import optimize, stats
from statsmodels.regression.linear_model import WLS
from statsmodels.stats import meta_analysis as sm_meta

EPS = np.finfo(float).eps
BRENT_KW = dict(xtol=1e-15, rtol=4 * EPS, maxiter=1000, full_output=False)
LEVEL = 0.95
ALPHA = 1 - LEVEL
ESTIMATORS = ["reml", "ml", "dl", "pm", "he", "sj", "none"]
SM_TOL = 1e-10  # own implementation vs statsmodels WLS
CE_TOL = 1e-8  # own implementation vs statsmodels combine_effects

OWN = "own numpy/scipy implementation (tests/reference/generate.py)"
PUBLISHED_LABEL = "published, from memory; approximate, 4 decimals"

failures = []


def fail(msg):
    failures.append(msg)
    print("CROSS-CHECK FAILURE: " + msg, file=sys.stderr)


def close(a, b, tol):
    """|a-b| <= tol * max(1, |a|, |b|)"""
    return abs(a - b) <= tol * max(1.0, abs(a), abs(b))


def check_close(what, a, b, tol):
    a = np.atleast_1d(np.asarray(a, dtype=float))
    b = np.atleast_1d(np.asarray(b, dtype=float))
    if a.shape != b.shape:
        fail(f"{what}: shape {a.shape} vs {b.shape}")
        return float("inf")
    worst = 0.0
    for x, y in zip(a.ravel(), b.ravel()):
        d = abs(x - y) / max(1.0, abs(x), abs(y))
        worst = max(worst, d)
        if not close(x, y, tol):
            fail(f"{what}: {x!r} vs {y!r} (scaled diff {d:.3e} > {tol})")
    return worst


def fl(x):
    """plain python float (or None) for JSON"""
    if x is None:
        return None
    x = float(x)
    if not math.isfinite(x):
        raise ValueError("non-finite value in fixture")
    return x


def source_header():
    return {
        "generator": "tests/reference/generate.py",
        "python": platform.python_version(),
        "python_implementation": platform.python_implementation(),
        "libraries": {
            "numpy": np.__version__,
            "scipy": scipy.__version__,
            "statsmodels": statsmodels.__version__,
            "pandas": pandas.__version__,
        },
    }


# --------------------------------------------------------------------------
# core linear algebra at a given tau^2


def at_tau2(y, v, X, tau2):
    w = 1.0 / (v + tau2)
    XtW = X.T * w
    XtWX = XtW @ X
    inv = np.linalg.inv(XtWX)
    beta = np.linalg.solve(XtWX, XtW @ y)
    r = y - X @ beta
    q = float(np.sum(w * r * r))
    # tr(P) = sum(w) - tr((X'WX)^{-1} X'W^2X)
    trP = float(np.sum(w) - np.trace(inv @ ((X.T * w * w) @ X)))
    return {"w": w, "XtWX": XtWX, "inv": inv, "beta": beta, "r": r, "q": q, "trP": trP}


def q_of(y, v, X, tau2):
    return at_tau2(y, v, X, tau2)["q"]


def loglik(y, v, X, tau2, reml):
    a = at_tau2(y, v, X, tau2)
    val = np.sum(np.log(v + tau2)) + a["q"]
    if reml:
        sign, logdet = np.linalg.slogdet(a["XtWX"])
        val += logdet
    return -0.5 * float(val)


def score(y, v, X, tau2, reml):
    a = at_tau2(y, v, X, tau2)
    s = np.sum(a["w"] ** 2 * a["r"] ** 2)
    if reml:
        return 0.5 * float(s - a["trP"])
    return 0.5 * float(s - np.sum(a["w"]))


def generous_upper(y, v):
    tss = float(np.sum((y - np.mean(y)) ** 2))
    return max(tss / (len(y) - 1), float(np.max(v)), 1e-6)


def find_root_decreasing(f, lo, start_hi):
    """root of a function that is > 0 at lo and eventually < 0."""
    hi = start_hi
    n = 0
    while f(hi) > 0:
        hi *= 2.0
        n += 1
        if n > 200:
            raise RuntimeError("could not bracket root")
    return optimize.brentq(f, lo, hi, **BRENT_KW)


# --------------------------------------------------------------------------
# tau^2 estimators


def tau2_dl(y, v, X):
    k, p = X.shape
    a = at_tau2(y, v, X, 0.0)
    num = a["q"] - (k - p)
    den = a["trP"]  # sum(w) - tr((X'WX)^{-1} X'W^2 X), FE weights
    return max(0.0, num / den), num / den


def ols_parts(y, v, X):
    XtX_inv = np.linalg.inv(X.T @ X)
    b = np.linalg.solve(X.T @ X, X.T @ y)
    r = y - X @ b
    rss = float(r @ r)
    tr = float(np.trace(XtX_inv @ ((X.T * v) @ X)))
    return rss, tr


def tau2_he(y, v, X):
    k, p = X.shape
    rss, tr = ols_parts(y, v, X)
    raw = (rss - (np.sum(v) - tr)) / (k - p)
    return max(0.0, float(raw)), float(raw)


def tau2_sj(y, v, X):
    k, p = X.shape
    rss, _ = ols_parts(y, v, X)
    t0 = rss / k
    a = at_tau2(y, v, X, t0)
    direct = float(np.sum(t0 / (v + t0) * a["r"] ** 2) / (k - p))
    via_q = t0 * a["q"] / (k - p)
    if not close(direct, via_q, 1e-12):
        fail(f"SJ two forms disagree {direct} {via_q}")
    return direct, t0


def tau2_pm(y, v, X):
    k, p = X.shape
    target = k - p
    f = lambda t: q_of(y, v, X, t) - target
    if f(0.0) <= 0:
        return 0.0
    return find_root_decreasing(f, 0.0, generous_upper(y, v))


def tau2_likelihood(y, v, X, reml):
    """maximiser of the (RE)ML log-likelihood over tau^2 >= 0: grid + brentq on score."""
    ub = 100.0 * generous_upper(y, v)
    grid = np.concatenate([[0.0], np.logspace(-8, math.log10(ub), 2000)])
    ll = np.array([loglik(y, v, X, t, reml) for t in grid])
    i = int(np.argmax(ll))
    s0 = score(y, v, X, 0.0, reml)
    info = {"grid_points": int(len(grid)), "grid_upper": ub, "score_at_zero": s0}
    if i == len(grid) - 1:
        raise RuntimeError("likelihood maximum at the top of the grid")
    if s0 <= 0 and ll[0] >= ll.max():
        est = 0.0
        info["boundary"] = True
    else:
        lo = grid[max(i - 1, 0)]
        hi = grid[i + 1]
        f = lambda t: score(y, v, X, t, reml)
        if f(lo) <= 0:
            lo = 0.0
        if f(lo) <= 0 or f(hi) >= 0:
            raise RuntimeError("score does not change sign around grid maximum")
        est = optimize.brentq(f, lo, hi, **BRENT_KW)
        info["boundary"] = False
        if loglik(y, v, X, est, reml) < ll[0]:
            raise RuntimeError("interior root worse than boundary")
    # cross-check: scipy minimize_scalar (bounded) on the same objective
    res = optimize.minimize_scalar(
        lambda t: -loglik(y, v, X, t, reml),
        bounds=(0.0, generous_upper(y, v) * 10.0),
        method="bounded",
        options={"xatol": 1e-12, "maxiter": 5000},
    )
    info["minimize_scalar_bounded"] = float(res.x)
    info["minimize_scalar_success"] = bool(res.success)
    info["brentq"] = est
    info["abs_diff"] = abs(float(res.x) - est)
    info["loglik_brentq"] = loglik(y, v, X, est, reml)
    info["loglik_minimize_scalar"] = loglik(y, v, X, float(res.x), reml)
    if info["loglik_minimize_scalar"] > info["loglik_brentq"] + 1e-10:
        fail(f"minimize_scalar found a higher {'REML' if reml else 'ML'} log-likelihood")
    if info["abs_diff"] > 1e-5:
        fail(f"minimize_scalar and brentq disagree: {res.x} vs {est}")
    return est, info


def estimate_tau2(method, y, v, X):
    """returns (tau2, details dict)"""
    if method == "none":
        return 0.0, {"note": "tau2 fixed at 0"}
    if method == "dl":
        t, raw = tau2_dl(y, v, X)
        return t, {"untruncated": raw}
    if method == "he":
        t, raw = tau2_he(y, v, X)
        return t, {"untruncated": raw}
    if method == "sj":
        t, t0 = tau2_sj(y, v, X)
        return t, {"tau2_initial": t0}
    if method == "pm":
        return tau2_pm(y, v, X), {}
    if method in ("reml", "ml"):
        return tau2_likelihood(y, v, X, method == "reml")
    raise ValueError(method)


def qprofile_ci(y, v, X):
    k, p = X.shape
    df = k - p
    q_hi = stats.chi2.isf(ALPHA / 2, df)  # upper-tail 2.5% point
    q_lo = stats.chi2.ppf(ALPHA / 2, df)  # lower 2.5% point
    q0 = q_of(y, v, X, 0.0)
    start = generous_upper(y, v)
    bounds = []
    for target in (q_hi, q_lo):
        if q0 < target:
            bounds.append(0.0)
        else:
            f = lambda t, target=target: q_of(y, v, X, t) - target
            bounds.append(find_root_decreasing(f, 0.0, start))
    return bounds[0], bounds[1], {"target_low": q_hi, "target_high": q_lo}


# --------------------------------------------------------------------------
# inference


def design(data, moderators, levels):
    """X matrix and term names, intercept first; categorical moderators are
    dummy coded against their first level in sorted order."""
    k = len(data["effect"])
    cols = [np.ones(k)]
    terms = ["intercept"]
    for m in moderators:
        vals = data[m]
        if m in levels:
            for lev in levels[m][1:]:
                cols.append(np.array([1.0 if x == lev else 0.0 for x in vals]))
                terms.append(f"{m}={lev}")
        else:
            cols.append(np.asarray(vals, dtype=float))
            terms.append(m)
    return np.column_stack(cols), terms


def x_row(at, moderators, levels):
    row = [1.0]
    for m in moderators:
        if m in levels:
            row += [1.0 if at[m] == lev else 0.0 for lev in levels[m][1:]]
        else:
            row.append(float(at[m]))
    return np.array(row)


def fit_one(y, v, X, terms, tau2, kind, preds, moderators, levels):
    k, p = X.shape
    a = at_tau2(y, v, X, tau2)
    beta = a["beta"]
    if kind == "z":
        cov = a["inv"]
        dist = stats.norm
        df2 = None
    else:
        s2 = a["q"] / (k - p)
        cov = s2 * a["inv"]
        dist = stats.t(k - p)
        df2 = k - p
    se = np.sqrt(np.diag(cov))
    crit = dist.isf(ALPHA / 2)
    stat = beta / se
    pv = 2 * dist.sf(np.abs(stat))
    coefs = [
        {
            "term": terms[j],
            "estimate": fl(beta[j]),
            "se": fl(se[j]),
            "ci_low": fl(beta[j] - crit * se[j]),
            "ci_high": fl(beta[j] + crit * se[j]),
            "statistic": fl(stat[j]),
            "p": fl(pv[j]),
        }
        for j in range(p)
    ]
    if p > 1:
        b = beta[1:]
        V = cov[1:, 1:]
        wald = float(b @ np.linalg.solve(V, b))
        if kind == "z":
            mt = {"statistic": fl(wald), "df1": p - 1, "df2": None,
                  "p": fl(stats.chi2.sf(wald, p - 1))}
        else:
            F = wald / (p - 1)
            mt = {"statistic": fl(F), "df1": p - 1, "df2": k - p,
                  "p": fl(stats.f.sf(F, p - 1, k - p))}
    else:
        mt = None
    plist = []
    for at in preds:
        x0 = x_row(at, moderators, levels)
        mu = float(x0 @ beta)
        s = float(np.sqrt(x0 @ cov @ x0))
        # Prediction interval: t(k - p - 1) (Higgins, Thompson & Spiegelhalter
        # 2009) with the unscaled variance of x0'beta, or the one used by the
        # tests when larger; none when k - p - 1 < 1.
        spi = math.sqrt(max(float(x0 @ a["inv"] @ x0), s * s) + tau2)
        if k - p - 1 >= 1:
            crit_pi = stats.t(k - p - 1).isf(ALPHA / 2)
            pi = (fl(mu - crit_pi * spi), fl(mu + crit_pi * spi))
        else:
            pi = (None, None)
        plist.append({
            "at": at,
            "estimate": fl(mu),
            "se": fl(s),
            "ci_low": fl(mu - crit * s),
            "ci_high": fl(mu + crit * s),
            "pi_low": pi[0],
            "pi_high": pi[1],
        })
    return {"coefficients": coefs, "moderator_test": mt, "predictions": plist,
            "_cov": cov, "_beta": beta, "_w": a["w"], "_preds_x": [x_row(at, moderators, levels) for at in preds]}


def statsmodels_route(y, X, w, kind, own, label):
    """Second route: statsmodels WLS with weights 1/(v+tau2).
    default scale  -> Knapp-Hartung SEs (scale = Q(tau2)/(k-p)), t(k-p)
    'fixed scale'  -> z SEs (scale 1), normal."""
    k, p = X.shape
    mod = WLS(y, X, weights=w)
    res = mod.fit() if kind == "kh" else mod.fit(cov_type="fixed scale")
    ci = res.conf_int(alpha=ALPHA)
    out = {
        "estimate": [fl(x) for x in res.params],
        "se": [fl(x) for x in res.bse],
        "statistic": [fl(x) for x in res.tvalues],
        "p": [fl(x) for x in res.pvalues],
        "ci_low": [fl(x) for x in ci[:, 0]],
        "ci_high": [fl(x) for x in ci[:, 1]],
    }
    for key in out:
        check_close(f"{label} statsmodels {key}", [c[key] for c in own["coefficients"]], out[key], SM_TOL)
    if p > 1:
        R = np.zeros((p - 1, p))
        R[:, 1:] = np.eye(p - 1)
        if kind == "kh":
            ft = res.f_test(R)
            mt = {"statistic": fl(np.squeeze(ft.fvalue)), "df1": fl(ft.df_num),
                  "df2": fl(ft.df_denom), "p": fl(ft.pvalue)}
        else:
            wt = res.wald_test(R, use_f=False, scalar=True)
            mt = {"statistic": fl(np.squeeze(wt.statistic)), "df1": fl(wt.df_denom),
                  "df2": None, "p": fl(wt.pvalue)}
        for key in ("statistic", "df1", "p"):
            check_close(f"{label} statsmodels moderator_test {key}", own["moderator_test"][key], mt[key], SM_TOL)
        if kind == "kh":
            check_close(f"{label} statsmodels moderator_test df2", own["moderator_test"]["df2"], mt["df2"], SM_TOL)
        out["moderator_test"] = mt
    else:
        out["moderator_test"] = None
    preds = []
    for x0, pr in zip(own["_preds_x"], own["predictions"]):
        g = res.get_prediction(x0.reshape(1, -1))
        gci = g.conf_int(alpha=ALPHA)
        d = {"estimate": fl(g.predicted_mean[0]), "se": fl(g.se_mean[0]),
             "ci_low": fl(gci[0, 0]), "ci_high": fl(gci[0, 1])}
        for key in d:
            check_close(f"{label} statsmodels prediction {key}", pr[key], d[key], SM_TOL)
        preds.append(d)
    out["predictions"] = preds
    return out


def heterogeneity(y, v, X):
    k, p = X.shape
    a = at_tau2(y, v, X, 0.0)
    vtilde = (k - p) / a["trP"]
    return a["q"], k - p, float(stats.chi2.sf(a["q"], k - p)), vtilde


def fit_model(data, moderators, levels, preds, null_tau2):
    y = np.asarray(data["effect"], dtype=float)
    v = np.asarray(data["variance"], dtype=float)
    X, terms = design(data, moderators, levels)
    k, p = X.shape
    q, qdf, qp, vtilde = heterogeneity(y, v, X)
    ci_lo, ci_hi, ci_info = qprofile_ci(y, v, X)
    fits = {}
    cross = {"statsmodels_wls": {}, "tau2_details": {}}
    for est in ESTIMATORS:
        tau2, info = estimate_tau2(est, y, v, X)
        cross["tau2_details"][est] = info
        if moderators:
            t0 = null_tau2[est]
            r2 = None if t0 == 0 else max(0.0, min(1.0, (t0 - tau2) / t0))
        else:
            r2 = None
        fe = {}
        cross["statsmodels_wls"][est] = {}
        for kind in ("z", "kh"):
            own = fit_one(y, v, X, terms, tau2, kind, preds, moderators, levels)
            label = f"{'+'.join(moderators) or 'intercept_only'}/{est}/{kind}"
            cross["statsmodels_wls"][est][kind] = statsmodels_route(y, X, own["_w"], kind, own, label)
            fe[kind] = {
                "tau2": fl(tau2),
                "tau2_ci_low": None if est == "none" else fl(ci_lo),
                "tau2_ci_high": None if est == "none" else fl(ci_hi),
                "coefficients": own["coefficients"],
                "moderator_test": own["moderator_test"],
                "q": fl(q),
                "q_df": qdf,
                "q_p": fl(qp),
                "i2": fl(tau2 / (tau2 + vtilde)),
                "h2": fl((tau2 + vtilde) / vtilde),
                "r2": fl(r2),
                "predictions": own["predictions"],
            }
        fits[est] = fe
    model = {
        "moderators": list(moderators),
        "terms": terms,
        "k": k,
        "p": p,
        "qprofile_ci": {"low": fl(ci_lo), "high": fl(ci_hi), **{a: fl(b) for a, b in ci_info.items()}},
        "v_tilde": fl(vtilde),
        "fits": fits,
        "crosschecks": cross,
    }
    if not moderators:
        model["crosschecks"]["statsmodels_combine_effects"] = combine_effects_check(y, v, fits)
    return model, {e: fits[e]["z"]["tau2"] for e in ESTIMATORS}


def combine_effects_check(y, v, fits):
    """statsmodels.stats.meta_analysis.combine_effects (intercept-only only)."""
    out = {}
    for est, method, kw in (("dl", "chi2", {}), ("pm", "iterated", {}),
                            ("pm", "iterated", {"atol": 1e-13, "maxiter": 1000})):
        res = sm_meta.combine_effects(y, v, method_re=method, **kw)
        key = f"{est}_{method}" + ("_atol1e-13" if kw else "_default_tolerance")
        d = {
            "method_re": method,
            "kwds": kw,
            "tau2": fl(res.tau2),
            "mean_effect_re": fl(res.mean_effect_re),
            "sd_eff_w_re": fl(res.sd_eff_w_re),
            "sd_eff_w_re_hksj": fl(res.sd_eff_w_re_hksj),
            "q": fl(res.q),
        }
        ours_z = fits[est]["z"]
        ours_kh = fits[est]["kh"]
        d["diff_tau2"] = fl(res.tau2 - ours_z["tau2"])
        d["diff_mean"] = fl(res.mean_effect_re - ours_z["coefficients"][0]["estimate"])
        d["diff_se"] = fl(res.sd_eff_w_re - ours_z["coefficients"][0]["se"])
        d["diff_se_kh"] = fl(res.sd_eff_w_re_hksj - ours_kh["coefficients"][0]["se"])
        label = f"combine_effects {key}"
        check_close(label + " q", res.q, ours_z["q"], CE_TOL)
        if est == "dl" and res.tau2 < 0:
            # statsmodels does not truncate the DL estimate at zero, so its mean and SEs use a
            # negative tau2 and are not comparable with ours; only the untruncated tau2 and Q are.
            d["note"] = ("statsmodels returned a negative (untruncated) DL tau2; ours is max(0, .), so only "
                         "q and the untruncated tau2 are compared")
            check_close(label + " untruncated tau2", res.tau2, fits_raw_dl(y, v), CE_TOL)
            if ours_z["tau2"] != 0.0:
                fail(label + ": expected truncation to 0")
            d["asserted_to_1e-8"] = ["q", "tau2 (untruncated)"]
        else:
            check_close(label + " tau2", res.tau2, ours_z["tau2"], CE_TOL)
            check_close(label + " mean", res.mean_effect_re, ours_z["coefficients"][0]["estimate"], CE_TOL)
            check_close(label + " se", res.sd_eff_w_re, ours_z["coefficients"][0]["se"], CE_TOL)
            check_close(label + " se_kh", res.sd_eff_w_re_hksj, ours_kh["coefficients"][0]["se"], CE_TOL)
            d["asserted_to_1e-8"] = ["q", "tau2", "mean_effect_re", "sd_eff_w_re", "sd_eff_w_re_hksj"]
        out[key] = d
    return out


def fits_raw_dl(y, v):
    X = np.ones((len(y), 1))
    return tau2_dl(y, v, X)[1]


def strip_private(obj):
    if isinstance(obj, dict):
        return {k: strip_private(x) for k, x in obj.items() if not str(k).startswith("_")}
    if isinstance(obj, list):
        return [strip_private(x) for x in obj]
    if isinstance(obj, (np.floating,)):
        return fl(obj)
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, np.bool_):
        return bool(obj)
    return obj


MODEL_BLOCK_SOURCES = {
    "fits.*.*.tau2": OWN + ": estimator formulas in tests/reference/README.md; "
                     "PM/REML/ML roots by scipy.optimize.brentq (xtol=1e-15, rtol=4*eps)",
    "fits.*.*.tau2_ci_low/high": OWN + ": Q-profile (Viechtbauer 2007, Stat Med 26:37), scipy.optimize.brentq",
    "fits.*.*.coefficients, moderator_test, predictions": OWN + " (numpy linear algebra, scipy.stats "
                     "norm/t/chi2/f); cross-checked against statsmodels WLS to 1e-10",
    "fits.*.*.q, q_df, q_p, i2, h2, r2": OWN + " (scipy.stats.chi2.sf for q_p)",
    "crosschecks.statsmodels_wls": "statsmodels.regression.linear_model.WLS(y, X, weights=1/(v+tau2)); "
                     "kh: .fit() (default scale); z: .fit(cov_type='fixed scale'); "
                     "moderator tests via .f_test / .wald_test(use_f=False, scalar=True); predictions via .get_prediction",
    "crosschecks.tau2_details": OWN + "; REML/ML also scipy.optimize.minimize_scalar(method='bounded')",
    "crosschecks.statsmodels_combine_effects": "statsmodels.stats.meta_analysis.combine_effects (intercept-only models)",
}


def model_file(name, description, data, data_source, levels, model_specs, seed=None, extra=None):
    models = {}
    null_tau2 = None
    for mname, mods, preds in model_specs:
        m, t2 = fit_model(data, mods, levels, preds, null_tau2)
        if not mods:
            null_tau2 = t2
        models[mname] = m
    out = {
        "source": {**source_header(), "blocks": MODEL_BLOCK_SOURCES},
        "dataset": {
            "name": name,
            "description": description,
            "data_source": data_source,
            "seed": seed,
            "levels": levels,
            "data": data,
        },
        "settings": {"level": LEVEL, "estimators": ESTIMATORS},
        "models": models,
    }
    if extra:
        out.update(extra)
    return strip_private(out)


# --------------------------------------------------------------------------
# data sets

BCG_SOURCE = ("BCG vaccine trials, Colditz et al. 1994, JAMA 271:698 (also Berkey et al. 1995, "
              "Stat Med 14:395). Transcribed from memory; not verified against the original tables.")

# trial, author, year, tpos, tneg, cpos, cneg, ablat, alloc  (transcribed from memory)
BCG_ROWS = [
    (1, "Aronson", 1948, 4, 119, 11, 128, 44, "random"),
    (2, "Ferguson & Simes", 1949, 6, 300, 29, 274, 55, "random"),
    (3, "Rosenthal et al", 1960, 3, 228, 11, 209, 42, "random"),
    (4, "Hart & Sutherland", 1977, 62, 13536, 248, 12619, 52, "random"),
    (5, "Frimodt-Moller et al", 1973, 33, 5036, 47, 5761, 13, "alternate"),
    (6, "Stein & Aronson", 1953, 180, 1361, 372, 1079, 44, "alternate"),
    (7, "Vandiviere et al", 1973, 8, 2537, 10, 619, 19, "random"),
    (8, "TPT Madras", 1980, 505, 87886, 499, 87892, 13, "random"),
    (9, "Coetzee & Berjak", 1968, 29, 7470, 45, 7232, 27, "random"),
    (10, "Rosenthal et al", 1961, 17, 1699, 65, 1600, 42, "systematic"),
    (11, "Comstock et al", 1974, 186, 50448, 141, 27197, 18, "systematic"),
    (12, "Comstock & Webster", 1969, 5, 2493, 3, 2338, 33, "systematic"),
    (13, "Comstock et al", 1976, 27, 16886, 29, 17825, 33, "systematic"),
]

BCG_PUBLISHED = [
    # (model, estimator, quantity, published value) -- published, from memory
    ("intercept_only", "reml", "tau2", 0.3132),
    ("intercept_only", "reml", "estimate", -0.7145),
    ("intercept_only", "reml", "se", 0.1798),
    ("intercept_only", "reml", "q", 152.2330),
    ("intercept_only", "reml", "q_df", 12),
    ("intercept_only", "reml", "i2_percent", 92.22),
    ("intercept_only", "reml", "tau2_ci_low", 0.1197),
    ("intercept_only", "reml", "tau2_ci_high", 1.1115),
    ("intercept_only", "dl", "tau2", 0.3088),
    ("intercept_only", "dl", "estimate", -0.7141),
    ("ablat", "reml", "tau2", 0.0764),
    ("ablat", "reml", "intercept", 0.2515),
    ("ablat", "reml", "intercept_se", 0.2491),
    ("ablat", "reml", "ablat", -0.0291),
    ("ablat", "reml", "ablat_se", 0.0072),
    ("ablat", "reml", "q", 30.7331),
    ("ablat", "reml", "q_df", 11),
    ("ablat", "reml", "r2_percent", 75.62),
]


def bcg_data():
    study, year, te, tn, ce, cn, ablat, alloc, eff, var = ([] for _ in range(10))
    for trial, author, yr, tpos, tneg, cpos, cneg, lat, al in BCG_ROWS:
        n1 = tpos + tneg
        n2 = cpos + cneg
        study.append(f"{author} {yr}")
        year.append(yr)
        te.append(tpos)
        tn.append(n1)
        ce.append(cpos)
        cn.append(n2)
        ablat.append(lat)
        alloc.append(al)
        # log risk ratio (no zero cells in this data set)
        eff.append(float(math.log((tpos / n1) / (cpos / n2))))
        var.append(float(1 / tpos - 1 / n1 + 1 / cpos - 1 / n2))
    data = {"study": study, "year": year, "treat_events": te, "treat_n": tn,
            "ctrl_events": ce, "ctrl_n": cn, "ablat": ablat, "alloc": alloc,
            "effect": eff, "variance": var}
    # second route for the effects: statsmodels effectsize_2proportions
    e2, v2 = sm_meta.effectsize_2proportions(np.array(te), np.array(tn), np.array(ce), np.array(cn),
                                             statistic="rr")
    check_close("bcg log RR vs statsmodels", eff, e2, 1e-12)
    check_close("bcg log RR variance vs statsmodels", var, v2, 1e-12)
    return data


def bcg_csv(data):
    buf = io.StringIO()
    wr = csv.writer(buf, lineterminator="\n")
    wr.writerow(["study", "year", "treat_events", "treat_n", "ctrl_events", "ctrl_n", "ablat", "alloc"])
    for i in range(len(data["study"])):
        wr.writerow([data[c][i] for c in ("study", "year", "treat_events", "treat_n",
                                          "ctrl_events", "ctrl_n", "ablat", "alloc")])
    return buf.getvalue()


SIM_K20_SEED = 20240517
SIM_K8_SEED = 7


def sim_k20():
    """invented data: k=20, numeric moderator dose, 3-level region, true tau2=0.05"""
    rng = np.random.default_rng(SIM_K20_SEED)
    k = 20
    v = np.round(rng.permutation(np.linspace(0.01, 0.3, k)), 4)
    dose = np.round(rng.uniform(0.0, 10.0, k), 2)
    region = list(rng.permutation(["north"] * 7 + ["south"] * 7 + ["west"] * 6))
    beta = {"intercept": 0.2, "dose": 0.05, "south": 0.3, "west": -0.25}
    mu = (beta["intercept"] + beta["dose"] * dose
          + np.array([beta.get(r, 0.0) for r in region]))
    u = rng.normal(0.0, math.sqrt(0.05), k)
    e = rng.normal(0.0, np.sqrt(v))
    y = np.round(mu + u + e, 4)
    data = {
        "study": [f"sim{i + 1:02d}" for i in range(k)],
        "effect": [float(x) for x in y],
        "variance": [float(x) for x in v],
        "dose": [float(x) for x in dose],
        "region": [str(r) for r in region],
    }
    gen = {"seed": SIM_K20_SEED, "generator": "numpy.random.default_rng(seed)",
           "true_tau2": 0.05, "true_beta": beta,
           "variance": "permutation of linspace(0.01, 0.3, 20), rounded to 4 decimals",
           "dose": "uniform(0, 10), rounded to 2 decimals",
           "effect": "mu + N(0, tau2) + N(0, v_i), rounded to 4 decimals"}
    return data, gen


def sim_k8():
    """invented data: k=8, intercept only, true tau2=0 (REML estimate on the boundary)"""
    rng = np.random.default_rng(SIM_K8_SEED)
    k = 8
    v = np.round(rng.permutation(np.linspace(0.01, 0.3, k)), 4)
    y = np.round(0.3 + rng.normal(0.0, np.sqrt(v)), 4)
    data = {
        "study": [f"sim{i + 1:02d}" for i in range(k)],
        "effect": [float(x) for x in y],
        "variance": [float(x) for x in v],
    }
    gen = {"seed": SIM_K8_SEED, "generator": "numpy.random.default_rng(seed)",
           "true_tau2": 0.0, "true_mean": 0.3,
           "variance": "permutation of linspace(0.01, 0.3, 8), rounded to 4 decimals",
           "effect": "0.3 + N(0, v_i), rounded to 4 decimals"}
    return data, gen


def sim_csv(data, moderators):
    buf = io.StringIO()
    wr = csv.writer(buf, lineterminator="\n")
    cols = ["study", "effect", "variance"] + moderators
    wr.writerow(cols)
    for i in range(len(data["study"])):
        wr.writerow([repr(data[c][i]) if isinstance(data[c][i], float) else data[c][i] for c in cols])
    return buf.getvalue()


def reread_csv(text, numeric):
    """parse the CSV back so the fixtures are computed from exactly what is stored."""
    rows = list(csv.DictReader(io.StringIO(text)))
    return {c: [float(r[c]) if c in numeric else r[c] for r in rows] for c in rows[0]}


# --------------------------------------------------------------------------
# effect sizes


def effect_sizes():
    out = {"source": {**source_header(), "blocks": {
        "fisher_z": "plain numpy (np.arctanh); statsmodels has no function for it",
        "partial_r": "plain numpy; statsmodels has no function for it",
        "hedges_g.ours": "plain numpy, pondus definition (see README)",
        "hedges_g.statsmodels": "statsmodels.stats.meta_analysis.effectsize_smd",
        "two_by_two.ours": "plain numpy, pondus definition with 0.5 added to all cells when any cell is zero",
        "two_by_two.statsmodels": "statsmodels.stats.meta_analysis.effectsize_2proportions(..., zero_correction=0.5)",
        "published": PUBLISHED_LABEL + "; Borenstein, Hedges, Higgins & Rothstein (2009) "
                     "Introduction to Meta-Analysis, ch. 4",
    }}}

    fz = []
    for r, n in [(0.5, 100), (-0.3, 25), (0.0, 10), (0.9, 50), (0.123, 1000)]:
        fz.append({"r": r, "n": n, "z": fl(np.arctanh(r)), "v": fl(1.0 / (n - 3))})
    out["fisher_z"] = fz

    pr = []
    for t, n, cov in [(2.5, 50, 2), (-1.2, 30, 0), (4.0, 120, 5), (0.0, 20, 1)]:
        df = n - cov - 2
        r = t / math.sqrt(t * t + df)
        pr.append({"t": t, "n": n, "covariates": cov, "df": df, "r": fl(r),
                   "z": fl(np.arctanh(r)), "v": fl(1.0 / (n - 3 - cov))})
    out["partial_r"] = pr

    hg = []
    cases = [(103.0, 5.5, 50, 100.0, 4.5, 50), (10.0, 2.0, 12, 8.5, 2.5, 15),
             (0.0, 1.0, 5, 1.2, 1.5, 4), (50.0, 10.0, 200, 50.0, 12.0, 180)]
    for mt, st, nt, mc, sc, nc in cases:
        df = nt + nc - 2
        sp = math.sqrt(((nt - 1) * st ** 2 + (nc - 1) * sc ** 2) / df)
        d = (mt - mc) / sp
        J = 1 - 3 / (4 * df - 1)
        g = J * d
        vg = (nt + nc) / (nt * nc) + g * g / (2 * (nt + nc))
        g_sm, v_sm = sm_meta.effectsize_smd(mt, st, nt, mc, sc, nc)
        check_close("hedges g vs statsmodels effectsize_smd", g, g_sm, 1e-12)
        hg.append({
            "treat_mean": mt, "treat_sd": st, "treat_n": nt,
            "ctrl_mean": mc, "ctrl_sd": sc, "ctrl_n": nc,
            "ours": {"s_pooled": fl(sp), "d": fl(d), "df": df, "j": fl(J), "g": fl(g), "v": fl(vg)},
            "statsmodels": {"g": fl(g_sm), "v": fl(v_sm)},
        })
    out["hedges_g"] = hg
    out["hedges_g_note"] = (
        "statsmodels effectsize_smd uses the bias correction 1 - 3/(4N - 9) with N = n_t + n_c, which is "
        "identical to pondus' J = 1 - 3/(4 df - 1) with df = N - 2, so g agrees (asserted to 1e-12). "
        "Its variance is N/(n_t n_c) + g^2 / (2 (N - 3.94)); pondus uses N/(n_t n_c) + g^2 / (2 N). "
        "Compare only 'g' with statsmodels; compare 'v' with 'ours'.")

    ex = hg[0]["ours"]
    out["published"] = {
        "label": PUBLISHED_LABEL,
        "reference": "Borenstein, Hedges, Higgins & Rothstein (2009), Introduction to Meta-Analysis, ch. 4 "
                     "(treated mean 103, SD 5.5, n 50; control mean 100, SD 4.5, n 50)",
        "values": [
            {"quantity": q, "published": pub, "computed": ex[q], "diff": fl(ex[q] - pub),
             "decimals": 4, "rounded_computed": fl(round(ex[q], 4)),
             "agrees_to_published_decimals": bool(abs(ex[q] - pub) <= 0.5e-4 + 1e-12)}
            for q, pub in (("d", 0.5970), ("j", 0.9923), ("g", 0.5924))
        ],
    }

    tt = []
    tables = [(4, 123, 11, 139), (15, 100, 25, 100), (0, 20, 5, 20), (10, 10, 3, 12), (1, 50, 0, 45)]
    a_arr, n1_arr, c_arr, n2_arr = (np.array([t[i] for t in tables], dtype=float) for i in range(4))
    for i, (a, n1, c, n2) in enumerate(tables):
        b, d = n1 - a, n2 - c
        corrected = min(a, b, c, d) == 0
        # statsmodels adds a float zero_correction to the event counts of *every* study but grows n
        # only for studies with a zero cell, so it is called per table: 0.5 only where a cell is zero.
        zc = 0.5 if corrected else None
        sm_vals = {}
        for stat in ("odds-ratio", "rr", "diff"):
            e_, v_ = sm_meta.effectsize_2proportions(a_arr[i:i + 1], n1_arr[i:i + 1], c_arr[i:i + 1],
                                                     n2_arr[i:i + 1], statistic=stat, zero_correction=zc)
            sm_vals[stat] = (e_[0], v_[0])
        if corrected:
            a_, b_, c_, d_ = a + 0.5, b + 0.5, c + 0.5, d + 0.5
        else:
            a_, b_, c_, d_ = float(a), float(b), float(c), float(d)
        n1_, n2_ = a_ + b_, c_ + d_
        p1, p2 = a_ / n1_, c_ / n2_
        ours = {
            "log_or": fl(math.log(a_ * d_ / (b_ * c_))), "log_or_v": fl(1 / a_ + 1 / b_ + 1 / c_ + 1 / d_),
            "log_rr": fl(math.log(p1 / p2)), "log_rr_v": fl(1 / a_ - 1 / n1_ + 1 / c_ - 1 / n2_),
            "rd": fl(p1 - p2), "rd_v": fl(p1 * (1 - p1) / n1_ + p2 * (1 - p2) / n2_),
        }
        smd = {
            "log_or": fl(sm_vals["odds-ratio"][0]), "log_or_v": fl(sm_vals["odds-ratio"][1]),
            "log_rr": fl(sm_vals["rr"][0]), "log_rr_v": fl(sm_vals["rr"][1]),
            "rd": fl(sm_vals["diff"][0]), "rd_v": fl(sm_vals["diff"][1]),
        }
        for key in ours:
            check_close(f"2x2 table {i} {key} vs statsmodels", ours[key], smd[key], 1e-12)
        tt.append({"treat_events": a, "treat_n": n1, "ctrl_events": c, "ctrl_n": n2,
                   "zero_corrected": corrected, "ours": ours,
                   "statsmodels_zero_correction": zc, "statsmodels": smd})
    out["two_by_two"] = tt
    out["two_by_two_note"] = (
        "statsmodels effectsize_2proportions(zero_correction=0.5), for a study whose events are 0 or equal "
        "to n in either arm (i.e. any zero cell), adds 0.5 to every cell and 1 to each n: the pondus rule. "
        "But a float zero_correction is also added to the event counts of studies without a zero cell "
        "(their n is left unchanged), so it is called per table with zero_correction=0.5 only where a cell "
        "is zero and None otherwise (recorded as statsmodels_zero_correction). With that, all values agree "
        "(asserted to 1e-12).")
    return out


# --------------------------------------------------------------------------


def compare_published(bcg):
    rows = []
    for model, est, qty, pub in BCG_PUBLISHED:
        f = bcg["models"][model]["fits"][est]["z"]
        coefs = {c["term"]: c for c in f["coefficients"]}
        if qty == "estimate":
            val = coefs["intercept"]["estimate"]
        elif qty == "se":
            val = coefs["intercept"]["se"]
        elif qty in coefs:
            val = coefs[qty]["estimate"]
        elif qty.endswith("_se") and qty[:-3] in coefs:
            val = coefs[qty[:-3]]["se"]
        elif qty == "i2_percent":
            val = 100 * f["i2"]
        elif qty == "r2_percent":
            val = 100 * f["r2"]
        else:
            val = f[qty]
        decimals = 2 if qty.endswith("_percent") else 4
        rows.append({"model": model, "estimator": est, "quantity": qty, "published": pub,
                     "computed": fl(val), "diff": fl(val - pub), "decimals": decimals,
                     "rounded_computed": fl(round(val, decimals)),
                     "agrees_to_published_decimals": bool(abs(val - pub) <= 0.5 * 10.0 ** -decimals + 1e-12)})
    return rows


def dumps(obj):
    return json.dumps(obj, indent=1, allow_nan=False) + "\n"


def main():
    if len(sys.argv) != 2:
        print("usage: generate.py OUTDIR", file=sys.stderr)
        sys.exit(2)
    outdir = sys.argv[1]
    os.makedirs(outdir, exist_ok=True)
    files = {}

    # BCG
    bdata = bcg_data()
    files["bcg.csv"] = bcg_csv(bdata)
    specs = [
        ("intercept_only", [], [{}]),
        ("ablat", ["ablat"], [{"ablat": 10}, {"ablat": 30}, {"ablat": 50}]),
        ("ablat+year", ["ablat", "year"], [{"ablat": 10, "year": 1960}, {"ablat": 30, "year": 1960},
                                           {"ablat": 50, "year": 1970}]),
    ]
    bcg = model_file("bcg", "BCG vaccine trials, effect = log risk ratio (vaccinated vs control), "
                     "variance = 1/a - 1/n1 + 1/c - 1/n2", bdata, BCG_SOURCE, {}, specs)
    pub = compare_published(bcg)
    bcg["published"] = {"label": PUBLISHED_LABEL,
                        "reference": "our recollection of the widely reproduced analyses of the BCG data "
                                     "(Colditz et al. 1994; Berkey et al. 1995; Viechtbauer 2007 for the "
                                     "Q-profile interval); fit values taken from fits.<est>.z",
                        "values": pub}
    files["bcg.json"] = dumps(bcg)
    print("BCG published (from memory) vs computed:")
    for r in pub:
        print(f"  {r['model']:15s} {r['estimator']:5s} {r['quantity']:13s} published {r['published']:>10} "
              f"computed {r['computed']:.6f} diff {r['diff']:+.2e}"
              f"{'' if r['agrees_to_published_decimals'] else '   <-- differs beyond rounding of the published value'}")

    # simulated k=20
    d20, g20 = sim_k20()
    files["sim_k20.csv"] = sim_csv(d20, ["dose", "region"])
    d20 = reread_csv(files["sim_k20.csv"], {"effect", "variance", "dose"})
    levels = {"region": sorted(set(d20["region"]))}
    specs = [
        ("intercept_only", [], [{}]),
        ("dose", ["dose"], [{"dose": 2.0}, {"dose": 5.0}, {"dose": 8.0}]),
        ("region", ["region"], [{"region": "north"}, {"region": "south"}, {"region": "west"}]),
        ("dose+region", ["dose", "region"], [{"dose": 2.0, "region": "north"}, {"dose": 5.0, "region": "south"},
                                             {"dose": 8.0, "region": "west"}]),
    ]
    s20 = model_file("sim_k20", "simulated (invented) data, k=20, numeric dose, 3-level region",
                     d20, "invented: simulated in tests/reference/generate.py", levels, specs,
                     seed=SIM_K20_SEED, extra={"simulation": g20})
    files["sim_k20.json"] = dumps(s20)

    # simulated k=8 boundary
    d8, g8 = sim_k8()
    files["sim_k8_boundary.csv"] = sim_csv(d8, [])
    d8 = reread_csv(files["sim_k8_boundary.csv"], {"effect", "variance"})
    s8 = model_file("sim_k8_boundary", "simulated (invented) data, k=8, intercept only, true tau2 = 0",
                    d8, "invented: simulated in tests/reference/generate.py", {},
                    [("intercept_only", [], [{}])], seed=SIM_K8_SEED, extra={"simulation": g8})
    fits8 = s8["models"]["intercept_only"]["fits"]
    for est in ("reml", "ml", "dl", "pm"):
        if fits8[est]["z"]["tau2"] != 0.0:
            fail(f"sim_k8_boundary: {est} tau2 = {fits8[est]['z']['tau2']} is not on the boundary; change SIM_K8_SEED")
    files["sim_k8_boundary.json"] = dumps(s8)

    files["effect_sizes.json"] = dumps(effect_sizes())

    if failures:
        print(f"{len(failures)} cross-check failure(s); no files written", file=sys.stderr)
        sys.exit(1)
    for name, text in files.items():
        with open(os.path.join(outdir, name), "w", encoding="utf-8", newline="\n") as fh:
            fh.write(text)
    print(f"wrote {len(files)} files to {outdir}")


if __name__ == "__main__":
    main()
