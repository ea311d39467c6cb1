#!/usr/bin/env python3
"""Write the INVENTED extraction sheet data-examples/classroom-extraction.csv.

Fifteen fictional classroom studies of a reading-aloud programme (treatment)
against ordinary lessons (control), outcome a reading-fluency score. Each
study's true effect is 0.30 + 0.04*(weeks - 10) + u, u ~ N(0, 0.01); group
scores are simulated, and each study then "reports" its result the way real
papers do: group means and SDs, means and SEs, a t or F statistic, a p-value,
or medians with quartiles or ranges. Two rows are deliberately awkward for the
tutorial: one reports only "p < .05" (it cannot give an effect and is left
out), and one has both means and a t statistic that disagree (a typing error
of the kind the cross-check catches).

Standard library only; SEED = 1515; run `python3 data-examples/make_extraction.py`.
Nothing here describes a real study.
"""
import csv
import math
import os
import random
import statistics

SEED = 1515
HERE = os.path.dirname(os.path.abspath(__file__))
COLUMNS = [
    "study", "weeks",
    "treat_mean", "treat_sd", "treat_se", "treat_n",
    "ctrl_mean", "ctrl_sd", "ctrl_se", "ctrl_n",
    "t", "f", "p", "sign",
    "treat_median", "treat_q1", "treat_q3", "treat_min", "treat_max",
    "ctrl_median", "ctrl_q1", "ctrl_q3", "ctrl_min", "ctrl_max",
]
NAMES = [
    "Abernethy 2015", "Bjørnstad 2016", "Castillo 2016", "Dąbrowska 2017",
    "Eriksen 2017", "Fournier 2018", "Gallagher 2018", "Hüsken 2019",
    "Ibáñez 2019", "Jovanović 2020", "Kowalczyk 2020", "Lindqvist 2021",
    "Moreau 2021", "Nakamura 2022", "Okafor 2023",
]
ROUTES = [
    "means", "means", "means-se", "t", "t", "f", "p", "median-iqr",
    "median-range", "means", "p-inequality", "means+t-typo", "means-se",
    "median-iqr", "t",
]


def quartiles(xs):
    q = statistics.quantiles(xs, n=4, method="inclusive")
    return q[0], statistics.median(xs), q[2]


def r2(x):
    return f"{x:.2f}"


def main():
    rng = random.Random(SEED)
    rows = []
    for name, route in zip(NAMES, ROUTES):
        weeks = rng.choice([6, 8, 10, 12, 14, 16])
        delta = 0.30 + 0.04 * (weeks - 10) + rng.gauss(0, 0.1)
        nt, nc = rng.randint(18, 60), rng.randint(18, 60)
        treat = [rng.gauss(50 + 10 * delta, 10) for _ in range(nt)]
        ctrl = [rng.gauss(50, 10) for _ in range(nc)]
        mt, mc = statistics.fmean(treat), statistics.fmean(ctrl)
        st, sc = statistics.stdev(treat), statistics.stdev(ctrl)
        sp = math.sqrt(((nt - 1) * st**2 + (nc - 1) * sc**2) / (nt + nc - 2))
        t = (mt - mc) / (sp * math.sqrt(1 / nt + 1 / nc))
        row = {c: "" for c in COLUMNS}
        row.update(study=name, weeks=str(weeks), treat_n=str(nt), ctrl_n=str(nc))
        if route in ("means", "means+t-typo"):
            row.update(treat_mean=r2(mt), treat_sd=r2(st), ctrl_mean=r2(mc), ctrl_sd=r2(sc))
            if route == "means+t-typo":
                row["t"] = r2(t / 3)  # a mistyped t: a third of the true value
        elif route == "means-se":
            row.update(treat_mean=r2(mt), treat_se=r2(st / math.sqrt(nt)),
                       ctrl_mean=r2(mc), ctrl_se=r2(sc / math.sqrt(nc)))
        elif route == "t":
            row["t"] = r2(t)
        elif route == "f":
            row.update(f=r2(t * t), sign="1" if t > 0 else "-1")
        elif route == "p":
            # The p "printed in the paper" (invented, in PRINTED_P below) with t's sign.
            row.update(p=PRINTED_P[name], sign="1" if t > 0 else "-1")
        elif route == "p-inequality":
            row.update(p="< .05", sign="1")
        elif route in ("median-iqr", "median-range"):
            for g, xs in (("treat", treat), ("ctrl", ctrl)):
                q1, m, q3 = quartiles(xs)
                row[f"{g}_median"] = r2(m)
                if route == "median-iqr":
                    row[f"{g}_q1"], row[f"{g}_q3"] = r2(q1), r2(q3)
                else:
                    row[f"{g}_min"], row[f"{g}_max"] = r2(min(xs)), r2(max(xs))
        rows.append(row)
    path = os.path.join(HERE, "classroom-extraction.csv")
    with open(path, "w", newline="", encoding="utf-8") as f:
        w = csv.DictWriter(f, fieldnames=COLUMNS, lineterminator="\n")
        w.writeheader()
        w.writerows(rows)
    print("wrote", path)


# The p-value "printed" by the one p-route study (invented, three decimals).
PRINTED_P = {"Gallagher 2018": "0.021"}

if __name__ == "__main__":
    main()
