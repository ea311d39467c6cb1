#!/usr/bin/env python3
"""Independent reference values for pondus fit --probe / --compare-levels /
--regions and the artifact corrections (--reliability-x/-y, --range-ratio).

Usage: python interpret.py OUTDIR    (writes OUTDIR/interpret.json)

Computed here, not by pondus:
- tau^2 by REML with the grid + brentq maximiser of generate.py (imported,
  not edited); coefficients and their covariance by numpy at that tau^2.
- Conditional effects, simple slopes and level contrasts as contrasts c'b
  through statsmodels 0.14.6 WLS at the fitted tau^2 (weights 1/(v + tau^2));
  its scale Q/(k - p) is exactly the Knapp-Hartung factor, so t_test(c) gives
  the Knapp-Hartung estimate, SE, t and p on k - p df. The z variant uses the
  unscaled (X'WX)^-1 and the normal distribution, in numpy/scipy.
- Johnson-Neyman bounds as the roots of the quadratic
  (A + B m)^2 = c^2 Var(A + B m) by numpy.roots (companion-matrix eigenvalues,
  a different route from the closed form in pondus), each root checked with
  scipy.optimize.brentq on |theta(m)|/se(m) - c.
- Artifact corrections step by step (Hunter & Schmidt 2004, ch. 3, from
  memory), with the derivative dr_c/dr by scipy.differentiate.derivative
  (numerical, not the closed form used in pondus).

Data: the invented examples in data-examples/ (see data-examples/README.md).
"""

import csv
import json
import math
import os
import sys

import numpy as np
import scipy
import statsmodels
from scipy import optimize, stats
from scipy.differentiate import derivative
from statsmodels.regression.linear_model import WLS

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(os.path.dirname(HERE))
sys.path.insert(0, HERE)
import generate  # noqa: E402  (tau2_likelihood, at_tau2; not modified)

LEVEL = 0.95


def read(name):
    with open(os.path.join(ROOT, "data-examples", name), encoding="utf-8") as f:
        return list(csv.DictReader(f))


def fit(y, v, X, inference):
    tau2, _ = generate.tau2_likelihood(y, v, X, True)
    a = generate.at_tau2(y, v, X, tau2)
    k, p = X.shape
    w = 1.0 / (v + tau2)
    res = WLS(y, X, weights=w).fit()
    if np.max(np.abs(res.params - a["beta"])) > 1e-10:
        generate.fail("statsmodels WLS and numpy disagree on the coefficients")
    if inference == "kh":
        cov = a["inv"] * (a["q"] / (k - p))
        crit = stats.t.ppf(1 - (1 - LEVEL) / 2, k - p)
    else:
        cov = a["inv"]
        crit = stats.norm.ppf(1 - (1 - LEVEL) / 2)
    return {"tau2": tau2, "beta": a["beta"], "cov": cov, "inv": a["inv"], "crit": crit, "k": k, "p": p,
            "res": res, "inference": inference}


def contrast(f, c, with_pi=False):
    c = np.asarray(c, dtype=float)
    est = float(c @ f["beta"])
    se = float(math.sqrt(c @ f["cov"] @ c))
    if f["inference"] == "kh":
        t = f["res"].t_test(c.reshape(1, -1))
        # statsmodels' own numbers, checked against numpy's
        if abs(float(t.effect[0]) - est) > 1e-10 or abs(float(t.sd[0, 0]) - se) > 1e-10 * se:
            generate.fail("statsmodels t_test and numpy disagree")
        stat, pval = float(t.tvalue[0, 0]), float(t.pvalue)
        lo, hi = (float(x) for x in t.conf_int(alpha=1 - LEVEL)[0])
    else:
        stat = est / se
        pval = float(2 * stats.norm.sf(abs(stat)))
        lo, hi = est - f["crit"] * se, est + f["crit"] * se
    out = {"estimate": est, "se": se, "ci_low": lo, "ci_high": hi, "statistic": stat, "p": pval}
    if with_pi:
        # Prediction interval: t(k - p - 1) with the unscaled variance of the
        # estimate (Higgins, Thompson & Spiegelhalter 2009), or the scaled one
        # when larger (pondus's safeguard: never narrower than the CI).
        unscaled = float(c @ f["inv"] @ c)
        crit_pi = stats.t.ppf(1 - (1 - LEVEL) / 2, f["k"] - f["p"] - 1)
        half = crit_pi * math.sqrt(max(unscaled, se * se) + f["tau2"])
        out["pi_low"], out["pi_high"] = est - half, est + half
    return out


def jn(f, c0, d):
    """Roots of (A + B m)^2 - crit^2 (V00 + 2 m V01 + m^2 V11) = 0."""
    c0, d = np.asarray(c0, float), np.asarray(d, float)
    A, B = c0 @ f["beta"], d @ f["beta"]
    V = f["cov"]
    v00, v01, v11 = c0 @ V @ c0, c0 @ V @ d, d @ V @ d
    c2 = f["crit"] ** 2
    coef = [B * B - c2 * v11, 2 * (A * B - c2 * v01), A * A - c2 * v00]
    roots = np.roots(coef)
    real = sorted(float(r.real) for r in roots if abs(r.imag) < 1e-12 * max(1.0, abs(r.real)))
    g = lambda m: abs(A + B * m) / math.sqrt(v00 + 2 * m * v01 + m * m * v11) - f["crit"]
    checked = []
    for r in real:
        h = 1e-6 * max(1.0, abs(r))
        if g(r - h) * g(r + h) < 0:
            checked.append(optimize.brentq(g, r - h, r + h, xtol=1e-14, rtol=1e-15))
        else:
            generate.fail(f"no sign change of the JN margin around root {r}")
    for a_, b_ in zip(real, checked):
        if abs(a_ - b_) > 1e-8 * max(1.0, abs(a_)):
            generate.fail("numpy.roots and brentq disagree on a JN bound")
    if coef[0] > 0:
        region = "outside" if len(real) == 2 else "everywhere"
    else:
        region = "inside" if len(real) == 2 else "nowhere"
    return {"bounds": real, "significant": region, "quadratic": [float(x) for x in coef]}


def consortium():
    rows = read("consortium-correlations.csv")
    r = np.array([float(x["r"]) for x in rows])
    n = np.array([float(x["n"]) for x in rows])
    s = np.array([float(x["session_minutes"]) for x in rows])
    online = np.array([1.0 if x["mode"] == "online" else 0.0 for x in rows])
    y, v = np.arctanh(r), 1.0 / (n - 3.0)
    mean, sd = float(s.mean()), float(s.std(ddof=1))
    out = {}
    for inference in ("kh", "z"):
        X = np.column_stack([np.ones_like(s), s, online])
        f = fit(y, v, X, inference)
        points = [mean - sd, mean, mean + sd]
        case = {
            "tau2": f["tau2"],
            "probe_session": [dict(at=m, **contrast(f, [1, m, 0], True)) for m in points],
            "probe_session_given": [dict(at=m, **contrast(f, [1, m, 0], True)) for m in (15.0, 45.0)],
            "probe_mode": [dict(at=l, **contrast(f, [1, mean, o], True))
                           for l, o in (("in_person", 0), ("online", 1))],
            "contrast_online_minus_in_person": contrast(f, [0, 0, 1]),
            "jn_effect_session": jn(f, [1, 0, 0], [0, 1, 0]),
        }
        # product term session x mode
        Xi = np.column_stack([np.ones_like(s), s, online, s * online])
        fi = fit(y, v, Xi, inference)
        case["interaction"] = {
            "tau2": fi["tau2"],
            "slopes_session": [dict(at=l, **contrast(fi, [0, 1, 0, o]))
                               for l, o in (("in_person", 0), ("online", 1))],
            "diff_online_at_session": [dict(at=m, **contrast(fi, [0, 0, 1, m])) for m in points],
            "jn_effect_session": jn(fi, [1, 0, 0, 0], [0, 1, 0, 0]),
            "jn_diff_online_session": jn(fi, [0, 0, 1, 0], [0, 0, 0, 1]),
        }
        # numeric x numeric: session x n (n is the sample size column, used
        # here only as a second numeric study characteristic)
        Xn = np.column_stack([np.ones_like(s), s, n, s * n])
        fn = fit(y, v, Xn, inference)
        case["numeric_interaction"] = {
            "tau2": fn["tau2"],
            "slopes_session_at_n": [dict(at=m, **contrast(fn, [0, 1, 0, m])) for m in (100.0, 300.0)],
            "jn_slope_session_along_n": jn(fn, [0, 1, 0, 0], [0, 0, 0, 1]),
        }
        out[inference] = case
    return out


def hs_correct(r, ryy, u, rxx):
    r1 = r / math.sqrt(ryy)
    U = 1.0 / u
    r2 = U * r1 / math.sqrt((U * U - 1.0) * r1 * r1 + 1.0)
    rxx_a = 1.0 - u * u * (1.0 - rxx)
    return r2 / math.sqrt(rxx_a)


def hiring():
    rows = read("hiring-validity.csv")
    studies = []
    y, v, share = [], [], []
    for x in rows:
        r, n = float(x["r"]), float(x["n"])
        rxx, ryy, u = float(x["rel_exercise"]), float(x["rel_rating"]), float(x["range_ratio"])
        rc = hs_correct(r, ryy, u, rxx)
        d = derivative(lambda t: np.vectorize(hs_correct)(t, ryy, u, rxx), r,
                       tolerances=dict(atol=1e-13, rtol=1e-12))
        if not d.success:
            generate.fail("scipy derivative did not converge")
        factor = float(d.df)
        v_obs = (1 - r * r) ** 2 / (n - 1)
        studies.append({"study": x["study"], "observed_r": r, "corrected_r": rc,
                        "observed_variance": v_obs, "corrected_variance": v_obs * factor ** 2,
                        "se_factor": factor})
        y.append(rc)
        v.append(v_obs * factor ** 2)
        share.append(float(x["hired_share"]))
    y, v, share = np.array(y), np.array(v), np.array(share)
    X = np.column_stack([np.ones_like(share), share])
    f = fit(y, v, X, "kh")
    mean, sd = float(share.mean()), float(share.std(ddof=1))
    return {
        "studies": studies,
        "tau2": f["tau2"],
        "beta": [float(b) for b in f["beta"]],
        "probe_share": [dict(at=m, **contrast(f, [1, m], True)) for m in (mean - sd, mean, mean + sd)],
        "jn_effect_share": jn(f, [1, 0], [0, 1]),
    }


def main():
    outdir = sys.argv[1]
    os.makedirs(outdir, exist_ok=True)
    out = {
        "source": {
            "generator": "tests/reference/interpret.py",
            "numpy": np.__version__,
            "scipy": scipy.__version__,
            "statsmodels": statsmodels.__version__,
            "python": sys.version.split()[0],
            "level": LEVEL,
            "note": "invented data from data-examples/; tau2 by REML (generate.py's maximiser); "
                    "contrasts by statsmodels WLS t_test at the fitted tau2 (Knapp-Hartung) or "
                    "numpy/scipy (z); JN bounds by numpy.roots with a brentq check; artifact "
                    "derivatives by scipy.differentiate",
        },
        "consortium": consortium(),
        "hiring": hiring(),
    }
    with open(os.path.join(outdir, "interpret.json"), "w", encoding="utf-8") as fh:
        fh.write(json.dumps(out, indent=1, sort_keys=True, ensure_ascii=False) + "\n")
    print(f"wrote {outdir}/interpret.json")


if __name__ == "__main__":
    main()
