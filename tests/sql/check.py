#!/usr/bin/env python3
"""The SQL route of `pondus sites` on DuckDB, compared with the streaming route.

Usage: python check.py PONDUS_BINARY WORK_DIR

1. Generates participant rows (seeded, standard library only) for 40 sites,
   with column names that need quoting (a space, a double quote), empty
   cells (NULL in the engine), sites too small for the model and a site whose
   w is constant (no product term).
2. Loads them into DuckDB, runs the query `pondus sql` prints, and saves
   the result as the moments CSV (numbers written with repr: exact).
3. Runs `pondus sites --moments` on it and `pondus sites` on the raw CSV,
   and asserts that both effects files have the same sites, columns and
   empty cells, and numbers agreeing to 1e-9 relative (or 1e-12 absolute).

Prints "N passed, 0 failed" on success; exits 1 with the differences otherwise.
"""

import csv
import math
import os
import random
import subprocess
import sys

import duckdb

RTOL = 1e-9
ATOL = 1e-12
SEED = 77031


def generate(path):
    rng = random.Random(SEED)
    header = ["site id", "dose", 'age "years"', "baseline", "score"]
    rows = []
    for s in range(40):
        site = f"clinic-{s:02d}" if s % 5 else f"Ward {s} \u00e9"
        n = 2 if s == 3 else rng.randint(5, 400)
        slope = rng.gauss(0.8, 0.3)
        centre = rng.uniform(-5, 5)
        for _ in range(n):
            x = rng.gauss(10 + centre, 2.0)
            w = 40.0 if s == 7 else rng.gauss(45, 12)
            c = rng.gauss(0, 1) + 0.1 * x
            y = 100 + slope * x + 0.05 * w + 0.01 * x * w - 2 * c + rng.gauss(0, 3)
            cells = [site, repr(x), repr(w), repr(c), repr(y)]
            if rng.random() < 0.01:
                cells[rng.randint(1, 4)] = ""
            rows.append(cells)
    rng.shuffle(rows)
    with open(path, "w", newline="", encoding="utf-8") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(header)
        w.writerows(rows)
    return header


def pondus(binary, *args):
    r = subprocess.run([binary, *args], capture_output=True, text=True)
    if r.returncode != 0:
        sys.exit(f"pondus {' '.join(args)} failed ({r.returncode}):\n{r.stderr}")
    return r.stdout


def main(binary, work):
    raw = os.path.join(work, "raw.csv")
    site, x, w, c, y = generate(raw)
    role_args = ["--site", site, "--x", x, "--y", y, "--w", w, "--covariate", c]
    query = pondus(binary, "sql", "--table", "trial rows", *role_args)
    con = duckdb.connect()
    con.execute(
        "CREATE TABLE \"trial rows\" AS SELECT * FROM read_csv(?, header = true, nullstr = '', "
        "columns = {'site id': 'VARCHAR', 'dose': 'DOUBLE', 'age \"years\"': 'DOUBLE', "
        "'baseline': 'DOUBLE', 'score': 'DOUBLE'})",
        [raw],
    )
    cur = con.execute(query)
    names = [d[0] for d in cur.description]
    result = cur.fetchall()
    moments = os.path.join(work, "moments.csv")
    with open(moments, "w", newline="", encoding="utf-8") as f:
        wr = csv.writer(f, lineterminator="\n")
        wr.writerow(names)
        for row in result:
            wr.writerow(["" if v is None else (repr(v) if isinstance(v, float) else str(v)) for v in row])
    a_path = os.path.join(work, "from_sql.csv")
    b_path = os.path.join(work, "streamed.csv")
    pondus(binary, "sites", "--moments", moments, "--out", a_path, "--quiet")
    pondus(binary, "sites", raw, *role_args, "--out", b_path, "--quiet")
    a = list(csv.reader(open(a_path, encoding="utf-8")))
    b = list(csv.reader(open(b_path, encoding="utf-8")))
    problems = []
    checked = 0
    if a[0] != b[0]:
        problems.append(f"headers differ: {a[0]} vs {b[0]}")
    if len(a) != len(b):
        problems.append(f"{len(a) - 1} sites via SQL, {len(b) - 1} streamed")
    for ra, rb in zip(a[1:], b[1:]):
        if ra[0] != rb[0]:
            problems.append(f"site order differs: {ra[0]} vs {rb[0]}")
            continue
        for h, va, vb in zip(a[0][1:], ra[1:], rb[1:]):
            if (va == "") != (vb == ""):
                problems.append(f"{ra[0]} {h}: '{va}' vs '{vb}'")
                continue
            if va == "":
                continue
            fa, fb = float(va), float(vb)
            checked += 1
            if not (abs(fa - fb) <= ATOL or abs(fa - fb) <= RTOL * max(abs(fa), abs(fb))):
                problems.append(f"{ra[0]} {h}: {fa!r} via SQL, {fb!r} streamed")
    # The data were built with one site too small and one without a product term.
    if len(b) - 1 != 39:
        problems.append(f"expected 39 estimated sites, got {len(b) - 1}")
    if not any(r[0] == "clinic-07" and r[5] == "" for r in b[1:]):
        problems.append("clinic-07 (constant w) should have an empty product term")
    for p in problems[:50]:
        print("  " + p)
    print(f"sql check (duckdb {duckdb.__version__}, {len(result)} site groups, {checked} numbers): "
          f"{checked if not problems else 0} passed, {len(problems)} failed")
    sys.exit(1 if problems else 0)


if __name__ == "__main__":
    if len(sys.argv) != 3:
        sys.exit("usage: check.py PONDUS_BINARY WORK_DIR")
    main(sys.argv[1], sys.argv[2])
