#!/usr/bin/env python3
"""Reference values for `pondus sites --effect smd` and `--effect log-or`.

Usage: python site_groups.py OUT_DIR

Writes into OUT_DIR (invented data, for the test only):
  rows.csv      participant rows (lab, arm, score, passed): arm is the text
                label 'control' or 'treatment', score a continuous outcome,
                passed 'yes' or 'no'; 8 labs, one with no control event
                (a zero cell), rows shuffled; a few empty cells
  expected.csv  per lab: group sizes, Hedges' g and its variance, the 2x2
                table, the log odds ratio and its variance, zero_cell
  moments.csv   per lab: the moments table that `pondus sql` would return
                for arm coded 0/1 (treatment = 1) and score (n, means,
                population covariances), for the --moments route
  moments_binary.csv  the same for arm and passed (yes = 1)

Independent of pondus: the group means and SDs (ddof = 1) are taken from
each group's own rows with numpy; g from statsmodels 0.14.6
`stats.meta_analysis.effectsize_smd` (pooled SD of the two group SDs,
J = 1 - 3/(4 n - 9)); its variance by the Hedges & Olkin formula
(n_t + n_c)/(n_t n_c) + g^2/(2 (n_t + n_c)) written out here (statsmodels'
own variance uses n - 3.94, a different approximation, so it is not used).
The log odds ratio and its SE from statsmodels
`stats.contingency_tables.Table2x2` (shift_zeros=False), on the table with
0.5 added to every cell when a cell is zero (added here: statsmodels'
shift_zeros adds 0.5 to the zero cells only).
"""

import csv
import os
import sys

import numpy as np
import statsmodels
from statsmodels.stats.contingency_tables import Table2x2
from statsmodels.stats.meta_analysis import effectsize_smd

SEED = 20261203


def main(out):
    os.makedirs(out, exist_ok=True)
    rng = np.random.default_rng(SEED)
    sizes = [12, 20, 31, 45, 60, 90, 150, 17]
    rows = []
    expected = []
    mom_c = []
    mom_b = []
    for s, n in enumerate(sizes):
        lab = f"Lab {s + 1}"
        arm = rng.integers(0, 2, n)
        arm[:2] = [0, 1]  # both groups present
        score = 50 + 3.0 * arm + 2.0 * s + rng.normal(0, 8 + s, n)
        p = np.where(arm == 1, 0.55, 0.35)
        passed = (rng.uniform(0, 1, n) < p).astype(int)
        if s == 7:
            passed[arm == 0] = 0  # no control event: a zero cell
        treat, ctrl = arm == 1, arm == 0
        g, _ = effectsize_smd(
            score[treat].mean(), score[treat].std(ddof=1), treat.sum(),
            score[ctrl].mean(), score[ctrl].std(ddof=1), ctrl.sum(),
        )
        nt, nc = treat.sum(), ctrl.sum()
        var_g = (nt + nc) / (nt * nc) + g * g / (2 * (nt + nc))
        a, c = passed[treat].sum(), passed[ctrl].sum()
        table = np.array([[a, nt - a], [c, nc - c]], dtype=float)
        # The zero-cell convention of pondus (and of the 2x2 route of its
        # fit): 0.5 added to every cell. statsmodels' own shift_zeros adds
        # 0.5 to the zero cells only (and in place), so it is not used.
        zero = bool((table == 0).any())
        t2 = Table2x2(table + 0.5 if zero else table, shift_zeros=False)
        expected.append([lab, n, nt, nc, g, var_g, a, c, t2.log_oddsratio,
                         t2.log_oddsratio_se ** 2, "yes" if zero else "no"])
        mom_c.append(moments(lab, arm.astype(float), score))
        mom_b.append(moments(lab, arm.astype(float), passed.astype(float)))
        for i in range(n):
            rows.append([lab, "treatment" if arm[i] else "control",
                         repr(float(score[i])), "yes" if passed[i] else "no"])
    order = rng.permutation(len(rows))
    rows = [rows[i] for i in order]
    # Empty cells leave rows out of the effect that needs them: added as
    # extra rows so that the expected values above stay those of the full
    # groups.
    rows.insert(5, ["Lab 1", "treatment", "", "NA"])
    rows.insert(9, ["Lab 2", "", "51.5", "no"])
    with open(os.path.join(out, "rows.csv"), "w", newline="") as f:
        wr = csv.writer(f, lineterminator="\n")
        wr.writerow(["lab", "arm", "score", "passed"])
        wr.writerows(rows)
    with open(os.path.join(out, "expected.csv"), "w", newline="") as f:
        wr = csv.writer(f, lineterminator="\n")
        wr.writerow(["study", "n", "treat_n", "ctrl_n", "g", "var_g", "treat_events",
                     "ctrl_events", "log_or", "var_log_or", "zero_cell"])
        for r in expected:
            wr.writerow([r[0], r[1], r[2], r[3], repr(float(r[4])), repr(float(r[5])), r[6], r[7],
                         repr(float(r[8])), repr(float(r[9])), r[10]])
    header = ["site", "n", "mean_x", "mean_y", "cov_x_x", "cov_x_y", "cov_y_y"]
    for name, table in (("moments.csv", mom_c), ("moments_binary.csv", mom_b)):
        with open(os.path.join(out, name), "w", newline="") as f:
            wr = csv.writer(f, lineterminator="\n")
            wr.writerow(header)
            wr.writerows(table)
    print(f"site_groups.py: statsmodels {statsmodels.__version__}, numpy {np.__version__}")


def moments(lab, x, y):
    """One row of the moments table: n, means, population covariances."""
    n = len(x)
    cov = np.cov(np.vstack([x, y]), ddof=0)
    return [lab, n] + [repr(float(v)) for v in
                       (x.mean(), y.mean(), cov[0, 0], cov[0, 1], cov[1, 1])]


if __name__ == "__main__":
    if len(sys.argv) != 2:
        sys.exit("usage: site_groups.py OUT_DIR")
    main(sys.argv[1])
