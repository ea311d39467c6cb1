#!/usr/bin/env python3
"""Reference values for `pondus sites`: per-site OLS with statsmodels.

Usage: python sites.py OUT_DIR

Writes into OUT_DIR:
  raw.csv             generated participant rows (site, x, c, w, y), 7 sites
  expected.csv        per site: n, slope of x in y ~ 1 + x + c with its classical
                      and HC3 SE, Pearson r of x and y, the product term b3 of
                      y ~ 1 + x + c + w + x*w with classical and HC3 SE, means of x, w
  offset_raw.csv      rows with x and y around 1e9 (site, x, y), 3 sites
  offset_expected.csv slope, classical and HC3 SE, r, mean of x

Independent of pondus: statsmodels 0.14.6 OLS (its pinv solve on the full
design matrix, and cov_type='HC3'), numpy for r. For the large-offset data
the reference is computed on x − 1e9 and y − 1e9, which is exact for these
doubles (the subtraction of numbers within a factor of two is exact,
Sterbenz's lemma) and leaves slopes, SEs and r unchanged, so statsmodels
sees a well-conditioned problem; pondus gets the raw values.
"""

import csv
import os
import sys

import numpy as np
import statsmodels
import statsmodels.api as sm

SEED = 20261201


def fit(y, X):
    plain = sm.OLS(y, X).fit()
    robust = sm.OLS(y, X).fit(cov_type="HC3")
    return plain.params, plain.bse, robust.bse


def main(out):
    os.makedirs(out, exist_ok=True)
    rng = np.random.default_rng(SEED)
    sizes = [6, 9, 15, 40, 120, 333, 25]
    raw = []
    expected = []
    for s, n in enumerate(sizes):
        site = f"S{s + 1}"
        x = rng.normal(2.0 + s, 1.0 + 0.2 * s, n)
        c = rng.normal(0, 1, n) + 0.3 * x
        w = rng.uniform(-1, 3, n)
        # heteroskedastic errors so that HC3 differs from the classical SE
        e = rng.normal(0, 1, n) * (0.5 + 0.4 * np.abs(x - x.mean()))
        y = 1.0 + (0.5 + 0.1 * s) * x - 0.7 * c + 0.3 * w + 0.25 * x * w + e
        for row in zip(x, c, w, y):
            raw.append([site] + [repr(float(v)) for v in row])
        b, se, hc3 = fit(y, np.column_stack([np.ones(n), x, c]))
        bi, sei, hc3i = fit(y, np.column_stack([np.ones(n), x, c, w, x * w]))
        r = np.corrcoef(x, y)[0, 1]
        expected.append([site, n, b[1], se[1], hc3[1], r, bi[4], sei[4], hc3i[4], x.mean(), w.mean()])
    # Rows shuffled: the per-site pass must not depend on row order.
    order = rng.permutation(len(raw))
    with open(os.path.join(out, "raw.csv"), "w", newline="") as f:
        wr = csv.writer(f, lineterminator="\n")
        wr.writerow(["site", "x", "c", "w", "y"])
        for i in order:
            wr.writerow(raw[i])
    with open(os.path.join(out, "expected.csv"), "w", newline="") as f:
        wr = csv.writer(f, lineterminator="\n")
        wr.writerow(["study", "n", "slope", "se", "se_hc3", "r", "interaction", "interaction_se",
                     "interaction_se_hc3", "mean_x", "mean_w"])
        for row in expected:
            wr.writerow([row[0], row[1]] + [repr(float(v)) for v in row[2:]])

    offset = 1e9
    raw = []
    expected = []
    for s, n in enumerate([50, 200, 1000]):
        site = f"L{s + 1}"
        d = rng.normal(0, 3, n)
        x = offset + d
        y = offset + 2.0 * d + rng.normal(0, 1 + 0.3 * np.abs(d), n)
        xs, ys = x - offset, y - offset  # exact (Sterbenz)
        b, se, hc3 = fit(ys, np.column_stack([np.ones(n), xs]))
        r = np.corrcoef(xs, ys)[0, 1]
        for row in zip(x, y):
            raw.append([site] + [repr(float(v)) for v in row])
        expected.append([site, n, b[1], se[1], hc3[1], r, xs.mean() + offset])
    with open(os.path.join(out, "offset_raw.csv"), "w", newline="") as f:
        wr = csv.writer(f, lineterminator="\n")
        wr.writerow(["site", "x", "y"])
        wr.writerows(raw)
    with open(os.path.join(out, "offset_expected.csv"), "w", newline="") as f:
        wr = csv.writer(f, lineterminator="\n")
        wr.writerow(["study", "n", "slope", "se", "se_hc3", "r", "mean_x"])
        for row in expected:
            wr.writerow([row[0], row[1]] + [repr(float(v)) for v in row[2:]])
    print(f"sites.py: statsmodels {statsmodels.__version__}, numpy {np.__version__}")


if __name__ == "__main__":
    if len(sys.argv) != 2:
        sys.exit("usage: sites.py OUT_DIR")
    main(sys.argv[1])
