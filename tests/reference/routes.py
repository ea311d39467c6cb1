#!/usr/bin/env python3
"""Reference values for the effect-size routes of issue 15 (`computed_from`).

Usage: python routes.py OUTDIR      (writes OUTDIR/routes.json)

Reads the invented test tables in tests/data/routes/ and computes, for each
row and each way pondus is run on it, the route taken, the effect on the
analysis scale and its sampling variance, independently of pondus:

- Hedges' g from means: statsmodels.stats.meta_analysis.effectsize_smd
  (statsmodels 0.14.6; its bias correction 1 - 3/(4N - 9) is J with
  df = N - 2). Its variance uses N - 3.94 in the second term, so the
  variance (n_t + n_c)/(n_t n_c) + g^2/(2(n_t + n_c)) of Hedges & Olkin
  (1985) is computed here with numpy 2.3.5.
- t quantiles of the p routes: scipy.stats.t.ppf (scipy 1.16.3); normal
  quantiles of the median routes and of confidence limits: scipy.stats.norm.ppf.
- Log odds ratios from counts: statsmodels effectsize_2proportions
  (statistic "or"; with a zero cell 0.5 is added to every cell, as pondus does).
- Medians: Luo et al. (2018) means, Wan et al. (2014) SDs, as in the issue.

Standard output gets a short log; the JSON is what the tests read.
"""
import csv
import json
import math
import os
import sys

import numpy as np
import scipy
import statsmodels
from scipy import stats
from statsmodels.stats.meta_analysis import effectsize_2proportions, effectsize_smd

HERE = os.path.dirname(os.path.abspath(__file__))
DATA = os.path.join(HERE, "..", "data", "routes")


def read(name):
    with open(os.path.join(DATA, name), encoding="utf-8") as f:
        return list(csv.DictReader(f))


def num(row, key):
    v = row.get(key, "").strip()
    if v == "":
        return None
    try:
        return float(v)
    except ValueError:
        return v  # text, e.g. "< .05"


def has(row, *keys):
    return all(isinstance(num(row, k), float) for k in keys)


def hedges_v(g, nt, nc):
    return (nt + nc) / (nt * nc) + g * g / (2 * (nt + nc))


def j_factor(nt, nc):
    return 1 - 3 / (4 * (nt + nc) - 9)


def g_means(mt, st, nt, mc, sc, nc):
    g, _ = effectsize_smd(np.array([mt]), np.array([st]), np.array([nt]),
                          np.array([mc]), np.array([sc]), np.array([nc]))
    g = float(g[0])
    return g, hedges_v(g, nt, nc)


def g_from_d(d, nt, nc):
    g = j_factor(nt, nc) * d
    return g, hedges_v(g, nt, nc)


def luo_wan_iqr(m, q1, q3, n):
    mean = (0.7 + 0.39 / n) * (q1 + q3) / 2 + (0.3 - 0.39 / n) * m
    sd = (q3 - q1) / (2 * stats.norm.ppf((0.75 * n - 0.125) / (n + 0.25)))
    return mean, sd


def luo_wan_range(m, a, b, n):
    w = 4 / (4 + n ** 0.75)
    mean = w * (a + b) / 2 + (1 - w) * m
    sd = (b - a) / (2 * stats.norm.ppf((n - 0.375) / (n + 0.25)))
    return mean, sd


def p_usable(row):
    p = num(row, "p")
    return isinstance(p, float) and 0 < p <= 1 and isinstance(num(row, "sign"), float)


def smd_d_routes(row):
    """Every complete group-comparison route as (route, d, nt, nc), in order."""
    out = []
    nt, nc = num(row, "treat_n"), num(row, "ctrl_n")
    if has(row, "treat_mean", "treat_sd", "treat_n", "ctrl_mean", "ctrl_sd", "ctrl_n"):
        g, _ = g_means(num(row, "treat_mean"), num(row, "treat_sd"), nt,
                       num(row, "ctrl_mean"), num(row, "ctrl_sd"), nc)
        out.append(("means", g / j_factor(nt, nc), nt, nc))
    if has(row, "treat_mean", "treat_se", "treat_n", "ctrl_mean", "ctrl_se", "ctrl_n"):
        st, sc = num(row, "treat_se") * math.sqrt(nt), num(row, "ctrl_se") * math.sqrt(nc)
        g, _ = g_means(num(row, "treat_mean"), st, nt, num(row, "ctrl_mean"), sc, nc)
        out.append(("means-se", g / j_factor(nt, nc), nt, nc))
    if has(row, "t", "treat_n", "ctrl_n"):
        out.append(("t", num(row, "t") * math.sqrt(1 / nt + 1 / nc), nt, nc))
    if has(row, "f", "sign", "treat_n", "ctrl_n"):
        t = num(row, "sign") * math.sqrt(num(row, "f"))
        out.append(("f", t * math.sqrt(1 / nt + 1 / nc), nt, nc))
    if has(row, "treat_n", "ctrl_n") and p_usable(row):
        p = num(row, "p")
        t = num(row, "sign") * stats.t.ppf(1 - p / 2, nt + nc - 2)
        out.append(("p", t * math.sqrt(1 / nt + 1 / nc), nt, nc))
    for route, keys, fn in (
        ("median-iqr", ("median", "q1", "q3"), luo_wan_iqr),
        ("median-range", ("median", "min", "max"), luo_wan_range),
    ):
        tk = [f"treat_{k}" for k in keys]
        ck = [f"ctrl_{k}" for k in keys]
        if has(row, *tk, *ck, "treat_n", "ctrl_n"):
            mt, st = fn(*(num(row, k) for k in tk), nt)
            mc, sc = fn(*(num(row, k) for k in ck), nc)
            g, _ = g_means(mt, st, nt, mc, sc, nc)
            out.append((route, g / j_factor(nt, nc), nt, nc))
    return out


def smd_rows(rows, convert):
    included, excluded, warned = [], [], []
    for row in rows:
        routes = smd_d_routes(row)
        if routes:
            route, d, nt, nc = routes[0]
            g, v = g_from_d(d, nt, nc)
            if any(abs(x[1] - d) > 0.05 for x in routes[1:]):
                warned.append(row["study"])
            included.append(dict(study=row["study"], computed_from=route, effect=g, variance=v))
        elif convert and has(row, "r", "n"):
            r, n = num(row, "r"), num(row, "n")
            d = 2 * r / math.sqrt(1 - r * r)
            vd = 4 * ((1 - r * r) ** 2 / (n - 1)) / (1 - r * r) ** 3
            j = 1 - 3 / (4 * (n - 2) - 1)
            included.append(dict(study=row["study"], computed_from="r-to-d", effect=j * d, variance=j * j * vd))
        elif convert and has(row, "treat_events", "treat_n", "ctrl_events", "ctrl_n"):
            y, v = effectsize_2proportions(num(row, "treat_events"), num(row, "treat_n"),
                                           num(row, "ctrl_events"), num(row, "ctrl_n"),
                                           statistic="or", zero_correction=None)
            k = math.sqrt(3) / math.pi
            j = j_factor(num(row, "treat_n"), num(row, "ctrl_n"))
            included.append(dict(study=row["study"], computed_from="counts-to-d",
                                 effect=j * float(y) * k, variance=j * j * float(v) * k * k))
        else:
            excluded.append(row["study"])
    return dict(included=included, excluded=excluded, warned=warned)


def r_rows(rows, convert):
    included, excluded, warned = [], [], []
    for row in rows:
        n = num(row, "n")
        cands = []
        if has(row, "r", "n"):
            cands.append(("r", num(row, "r")))
        if has(row, "t", "n"):
            t = num(row, "t")
            cands.append(("t", t / math.sqrt(t * t + n - 2)))
        if has(row, "n") and p_usable(row):
            t = num(row, "sign") * stats.t.ppf(1 - num(row, "p") / 2, n - 2)
            cands.append(("p", t / math.sqrt(t * t + n - 2)))
        if cands:
            route, r = cands[0]
            if any(abs(c[1] - r) > 0.02 for c in cands[1:]):
                warned.append(row["study"])
            included.append(dict(study=row["study"], computed_from=route,
                                 effect=float(np.arctanh(r)), variance=1 / (n - 3)))
            continue
        groups = smd_d_routes(row)
        if convert and groups:
            _, d, nt, nc = groups[0]
            a = (nt + nc) ** 2 / (nt * nc)
            r = d / math.sqrt(d * d + a)
            included.append(dict(study=row["study"], computed_from="d-to-r",
                                 effect=float(np.arctanh(r)), variance=1 / (nt + nc - 3)))
        else:
            excluded.append(row["study"])
    return dict(included=included, excluded=excluded, warned=warned)


def ratio_rows(rows, level):
    z = stats.norm.ppf(1 - (1 - level) / 2)
    included = []
    for row in rows:
        if has(row, "treat_events", "treat_n", "ctrl_events", "ctrl_n"):
            a, n1, c, n2 = (num(row, k) for k in ("treat_events", "treat_n", "ctrl_events", "ctrl_n"))
            zero = min(a, n1 - a, c, n2 - c) == 0
            y, v = effectsize_2proportions(a, n1, c, n2, statistic="or",
                                           zero_correction=0.5 if zero else None)
            included.append(dict(study=row["study"], computed_from="counts", effect=float(y), variance=float(v)))
        elif has(row, "or", "ci_low", "ci_high"):
            se = (math.log(num(row, "ci_high")) - math.log(num(row, "ci_low"))) / (2 * z)
            included.append(dict(study=row["study"], computed_from="ratio-ci",
                                 effect=math.log(num(row, "or")), variance=se * se))
        elif has(row, "log_or", "se"):
            included.append(dict(study=row["study"], computed_from="log-se",
                                 effect=num(row, "log_or"), variance=num(row, "se") ** 2))
    return dict(included=included, excluded=[], warned=[])


def effect_log_rows(rows, level):
    z = stats.norm.ppf(1 - (1 - level) / 2)
    included = []
    for row in rows:
        lo, hi = math.log(num(row, "ci_low")), math.log(num(row, "ci_high"))
        se = (hi - lo) / (2 * z)
        included.append(dict(study=row["study"], computed_from="ci",
                             effect=math.log(num(row, "effect")), variance=se * se))
    return dict(included=included, excluded=[], warned=[])


def main():
    out = sys.argv[1]
    os.makedirs(out, exist_ok=True)
    smd, r = read("smd-routes.csv"), read("r-routes.csv")
    ratio, eff = read("ratio-routes.csv"), read("effect-ratios.csv")
    result = {
        "source": {
            "script": "tests/reference/routes.py",
            "numpy": np.__version__,
            "scipy": scipy.__version__,
            "statsmodels": statsmodels.__version__,
        },
        "runs": {
            "smd": dict(file="smd-routes.csv", args=["--measure", "smd"], **smd_rows(smd, False)),
            "smd_convert": dict(file="smd-routes.csv", args=["--measure", "smd", "--convert"], **smd_rows(smd, True)),
            "r": dict(file="r-routes.csv", args=["--measure", "r"], **r_rows(r, False)),
            "r_convert": dict(file="r-routes.csv", args=["--measure", "r", "--convert"], **r_rows(r, True)),
            "log_or": dict(file="ratio-routes.csv", args=["--measure", "log-or"], **ratio_rows(ratio, 0.95)),
            "log_or_90": dict(file="ratio-routes.csv", args=["--measure", "log-or", "--ci-level", "0.9"], **ratio_rows(ratio, 0.90)),
            "effect_log": dict(file="effect-ratios.csv", args=["--effect-scale", "log"], **effect_log_rows(eff, 0.95)),
            "effect_log_90": dict(file="effect-ratios.csv", args=["--effect-scale", "log", "--ci-level", "0.9"], **effect_log_rows(eff, 0.90)),
        },
    }
    with open(os.path.join(out, "routes.json"), "w", encoding="utf-8") as f:
        json.dump(result, f, indent=1, ensure_ascii=False)
        f.write("\n")
    for name, run in result["runs"].items():
        print(f"{name}: {len(run['included'])} included, {len(run['excluded'])} excluded, warned {run['warned']}")


if __name__ == "__main__":
    main()
