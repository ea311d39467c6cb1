#!/usr/bin/env python3
"""The competing program of issue 20's benchmark: a vectorised numpy/scipy/pandas
script doing the core of `pondus fit FILE --moderator m1 --moderator m2 --moderator m3`.

Reads the CSV with pandas (only the needed columns), builds X = [1, m1, m2, m3],
and computes the REML estimate of tau^2 (root of the restricted score
1/2 [y'PPy - tr P], Viechtbauer 2005, J. Educ. Behav. Stat. 30:261; scipy's
brentq on a bracket found by doubling, 0 when the score at 0 is not positive),
the coefficients and Knapp-Hartung standard errors (Knapp & Hartung 2003,
Stat. Med. 22:2693), Cochran's Q_E at tau^2 = 0, and the Q-profile interval of
tau^2 (Viechtbauer 2007, Stat. Med. 26:37). It computes less than pondus does
(no intercept-only model, no I^2/H^2/R^2, no report), so the comparison
flatters it. Prints one JSON line with the numbers, for the check against
pondus's --json.

Usage: python benches/reml_numpy.py FILE.csv [PONDUS.json]   (numpy, scipy, pandas; versions printed)
With PONDUS.json (pondus fit ... --json of the same file), also prints the
largest relative difference from pondus's tau^2, its interval, the
coefficients and their standard errors, and Q_E.
"""
import json
import sys

import numpy as np
import pandas as pd
import scipy
from scipy import optimize, stats


def sums(y, v, x, tau2):
    """beta, (X'WX)^-1, residuals and weights at tau2."""
    w = 1.0 / (v + tau2)
    xw = x * w[:, None]
    m = x.T @ xw
    m_inv = np.linalg.inv(m)
    beta = m_inv @ (xw.T @ y)
    r = y - x @ beta
    return beta, m_inv, r, w, xw


def reml_score(y, v, x, tau2):
    beta, m_inv, r, w, xw = sums(y, v, x, tau2)
    # tr P = sum w - tr(M^-1 X'W^2X)
    tr_p = w.sum() - np.trace(m_inv @ (xw.T @ xw))
    return 0.5 * (np.sum(w * w * r * r) - tr_p)


def q_at(y, v, x, tau2):
    _, _, r, w, _ = sums(y, v, x, tau2)
    return float(np.sum(w * r * r))


def root_above(f, start):
    """Root of a decreasing f on [0, hi], hi found by doubling from start."""
    if f(0.0) <= 0.0:
        return 0.0
    hi = start
    while f(hi) > 0.0:
        hi *= 2.0
    return optimize.brentq(f, 0.0, hi, xtol=1e-300, rtol=4 * np.finfo(float).eps)


def main() -> None:
    path = sys.argv[1]
    frame = pd.read_csv(path, usecols=["effect", "variance", "m1", "m2", "m3"], dtype="float64")
    y = frame["effect"].to_numpy()
    v = frame["variance"].to_numpy()
    x = np.column_stack([np.ones(len(y)), frame["m1"], frame["m2"], frame["m3"]])
    k, p = x.shape
    scale = float(np.var(y))
    tau2 = root_above(lambda t: reml_score(y, v, x, t), scale)
    beta, m_inv, r, w, _ = sums(y, v, x, tau2)
    q_w = float(np.sum(w * r * r))
    kh = q_w / (k - p)  # the Knapp-Hartung scale, unfloored (pondus's default)
    se = np.sqrt(np.diag(m_inv) * kh)
    q_e = q_at(y, v, x, 0.0)
    upper = stats.chi2.ppf(0.975, k - p)
    lower = stats.chi2.ppf(0.025, k - p)
    ci_low = root_above(lambda t: q_at(y, v, x, t) - upper, scale)
    ci_high = root_above(lambda t: q_at(y, v, x, t) - lower, scale)
    out = {
        "versions": {"numpy": np.__version__, "scipy": scipy.__version__, "pandas": pd.__version__},
        "k": k, "tau2": tau2, "beta": beta.tolist(), "se_kh": se.tolist(),
        "q_e": q_e, "tau2_ci": [ci_low, ci_high],
    }
    if len(sys.argv) > 2:
        with open(sys.argv[2], encoding="utf-8") as f:
            theirs = json.load(f)
        pairs = [(tau2, theirs["tau2"]["estimate"]), (ci_low, theirs["tau2"]["ci_low"]),
                 (ci_high, theirs["tau2"]["ci_high"]), (q_e, theirs["heterogeneity"]["q"])]
        for c, b, s in zip(theirs["coefficients"], beta, se):
            pairs += [(b, c["estimate"]), (s, c["se"])]
        out["max_rel_diff_from_pondus"] = max(abs(a - b) / max(abs(b), 1e-300) for a, b in pairs)
    print(json.dumps(out))


if __name__ == "__main__":
    main()
