#!/usr/bin/env python3
"""The SQL route of `pondus sites` on real engines, compared with the streaming route.

Usage: python check.py PONDUS_BINARY WORK_DIR [ENGINE ...]

ENGINE is duckdb, sqlite, sqlite-text, postgres or spark (default: every one whose
Python package is importable; postgres needs PGHOST/PGPORT/PGUSER of a running
server, which tests/sql/check.sh starts).

1. Generates participant rows (seeded, standard library only) for 40 sites,
   with column names that need quoting (a space, a double quote), empty
   cells (NULL in the engine), sites too small for the model and a site whose
   w is constant (no product term).
2. Loads them into each engine, runs the query `pondus sql --engine E` prints,
   and saves the result as the moments CSV (numbers written with repr: exact).
   `sqlite-text` loads every cell as text, as a CSV import into SQLite does.
3. Runs `pondus sites --moments` on it and `pondus sites` on the raw CSV,
   and asserts that both effects files have the same sites, columns and
   empty cells, and numbers agreeing to 1e-9 relative (or 1e-12 absolute).
4. Runs `pondus sites --one-stage` on the rows and on each engine's moments
   and asserts the same of every number of the one-stage model's answer
   (coefficients, their SEs, intervals, z and p, τ², σ² and their intervals).

Prints one line per engine, "N passed, 0 failed" on success; exits 1 with
the differences otherwise.
"""

import csv
import json
import math
import os
import random
import subprocess
import sys

import importlib.util

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


TYPES = ["VARCHAR", "DOUBLE", "DOUBLE", "DOUBLE", "DOUBLE"]


def read_rows(raw):
    """The generated rows as Python values: the site id, then floats or None."""
    with open(raw, encoding="utf-8") as f:
        rows = list(csv.reader(f))[1:]
    return [[r[0]] + [float(v) if v != "" else None for v in r[1:]] for r in rows]


def run_duckdb(query, header, raw):
    import duckdb

    con = duckdb.connect()
    cols = ", ".join(f"'{h}': '{t}'" for h, t in zip(header, TYPES))
    con.execute(
        "CREATE TABLE \"trial rows\" AS SELECT * FROM read_csv(?, header = true, nullstr = '', "
        "columns = {" + cols + "})",
        [raw],
    )
    cur = con.execute(query)
    return [d[0] for d in cur.description], cur.fetchall(), f"duckdb {duckdb.__version__}"


def run_sqlite(query, header, raw, as_text):
    import sqlite3

    con = sqlite3.connect(":memory:")
    quoted = ", ".join('"' + h.replace('"', '""') + '"' for h in header)
    # No declared types: the values keep the storage class they are given
    # (REAL, or TEXT as after a CSV import with sqlite-text).
    con.execute(f'CREATE TABLE "trial rows" ({quoted})')
    rows = read_rows(raw)
    if as_text:
        rows = [[r[0]] + ["" if v is None else repr(v) for v in r[1:]] for r in rows]
    con.executemany(f'INSERT INTO "trial rows" VALUES ({", ".join("?" * len(header))})', rows)
    cur = con.execute(query)
    out = [d[0] for d in cur.description], cur.fetchall(), f"sqlite {sqlite3.sqlite_version}"
    # The standard query is refused here (no VAR_POP): the reason for --engine sqlite.
    try:
        con.execute(STANDARD_QUERY[0])
        sys.exit("sqlite accepted the standard query; the check of --engine sqlite proves nothing")
    except sqlite3.OperationalError as e:
        print(f"  sqlite refuses the standard query, as expected: {e}")
    return out


def run_postgres(query, header, raw):
    import psycopg

    with psycopg.connect(dbname="postgres", autocommit=True) as con:
        cols = ", ".join(
            '"' + h.replace('"', '""') + '" ' + ("TEXT" if t == "VARCHAR" else "DOUBLE PRECISION")
            for h, t in zip(header, TYPES)
        )
        con.execute('DROP TABLE IF EXISTS "trial rows"')
        con.execute(f'CREATE TABLE "trial rows" ({cols})')
        with con.cursor() as cur:
            with cur.copy('COPY "trial rows" FROM STDIN') as copy:
                for r in read_rows(raw):
                    copy.write_row(r)
            cur.execute(query)
            names = [d.name for d in cur.description]
            result = cur.fetchall()
        version = con.execute("SHOW server_version").fetchone()[0]
        return names, result, f"postgresql {version} (psycopg {psycopg.__version__})"


def run_spark(query, header, raw):
    import pyspark
    from pyspark.sql import SparkSession
    from pyspark.sql.types import DoubleType, StringType, StructField, StructType

    spark = (
        SparkSession.builder.master("local[1]")
        .appName("pondus-sql-check")
        .config("spark.ui.enabled", "false")
        .config("spark.driver.host", "127.0.0.1")
        .config("spark.driver.bindAddress", "127.0.0.1")
        .config("spark.sql.shuffle.partitions", "2")
        .config("spark.ui.showConsoleProgress", "false")
        .getOrCreate()
    )
    spark.sparkContext.setLogLevel("ERROR")
    try:
        schema = StructType(
            [StructField(h, StringType() if t == "VARCHAR" else DoubleType()) for h, t in zip(header, TYPES)]
        )
        spark.createDataFrame(read_rows(raw), schema).createOrReplaceTempView("trial_rows")
        rows = spark.sql(query).collect()
        # The standard query is refused here (double-quoted names, DOUBLE
        # PRECISION): the reason for --engine spark.
        try:
            spark.sql(STANDARD_QUERY[0].replace('"trial rows"', "trial_rows")).collect()
            sys.exit("spark accepted the standard query; the check of --engine spark proves nothing")
        except Exception as e:  # the parser's exception class differs by version
            first = next((l for l in str(e).splitlines() if l.strip()), type(e).__name__)
            print(f"  spark refuses the standard query, as expected: {first.strip()[:100]}")
        names = list(rows[0].asDict().keys()) if rows else []
        result = [tuple(r) for r in rows]
        return names, result, f"spark {spark.version} (pyspark {pyspark.__version__})"
    finally:
        spark.stop()


# The standard query (--engine standard), for the engines that must refuse it.
STANDARD_QUERY = [""]


def check_engine(binary, work, engine, raw, header, role_args, streamed):
    table = "trial_rows" if engine == "spark" else "trial rows"
    sql_engine = "sqlite" if engine == "sqlite-text" else engine
    query = pondus(binary, "sql", "--table", table, "--engine", sql_engine, *role_args)
    if engine == "duckdb":
        names, result, version = run_duckdb(query, header, raw)
    elif engine in ("sqlite", "sqlite-text"):
        names, result, version = run_sqlite(query, header, raw, engine == "sqlite-text")
    elif engine == "postgres":
        names, result, version = run_postgres(query, header, raw)
    elif engine == "spark":
        names, result, version = run_spark(query, header, raw)
    else:
        sys.exit(f"unknown engine {engine}")
    moments = os.path.join(work, f"moments-{engine}.csv")
    with open(moments, "w", newline="", encoding="utf-8") as f:
        wr = csv.writer(f, lineterminator="\n")
        wr.writerow(names)
        for row in result:
            wr.writerow(["" if v is None else (repr(v) if isinstance(v, float) else str(v)) for v in row])
    a_path = os.path.join(work, f"from-{engine}.csv")
    pondus(binary, "sites", "--moments", moments, "--out", a_path, "--quiet")
    # The one-stage model from this engine's moments, against the one from the rows.
    j_path = os.path.join(work, f"one-stage-{engine}.json")
    pondus(binary, "sites", "--moments", moments, "--one-stage", "--json", j_path, "--quiet")
    with open(j_path, encoding="utf-8") as f:
        one_stage = one_stage_numbers(json.load(f))
    a = list(csv.reader(open(a_path, encoding="utf-8")))
    b = streamed
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
    streamed_one_stage = STREAMED_ONE_STAGE[0]
    if set(one_stage) != set(streamed_one_stage):
        problems.append(f"one-stage keys differ: {sorted(set(one_stage) ^ set(streamed_one_stage))}")
    for k in sorted(set(one_stage) & set(streamed_one_stage)):
        fa, fb = one_stage[k], streamed_one_stage[k]
        checked += 1
        if not (abs(fa - fb) <= ATOL or abs(fa - fb) <= RTOL * max(abs(fa), abs(fb))):
            problems.append(f"one_stage{k}: {fa!r} via SQL, {fb!r} from the rows")
    for p in problems[:50]:
        print("  " + p)
    print(f"sql check {engine} ({version}, {len(result)} site groups, {checked} numbers "
          f"with the one-stage model's {len(one_stage)}): "
          f"{checked if not problems else 0} passed, {len(problems)} failed")
    return not problems


# The one-stage model's numbers from the raw rows (filled in by main).
STREAMED_ONE_STAGE = [{}]

# Parts of `one_stage` in the JSON whose numbers are the model's answer.
ONE_STAGE_PARTS = ("sites", "rows", "slope", "w_within", "within_interaction",
                   "across_interaction", "covariates", "characteristics", "variance")


def one_stage_numbers(doc):
    """Every number of the one-stage model's answer, keyed by its JSON path."""
    out = {}

    def walk(path, v):
        if isinstance(v, bool) or v is None or isinstance(v, str):
            return
        if isinstance(v, (int, float)):
            out[path] = float(v)
        elif isinstance(v, dict):
            for k, x in v.items():
                walk(f"{path}.{k}", x)
        elif isinstance(v, list):
            for i, x in enumerate(v):
                walk(f"{path}[{i}]", x)

    model = doc.get("one_stage")
    if not isinstance(model, dict):
        sys.exit("pondus sites --one-stage wrote no one_stage object")
    for part in ONE_STAGE_PARTS:
        walk(f".{part}", model.get(part))
    return out


def available(engine):
    module = {"duckdb": "duckdb", "sqlite": "sqlite3", "sqlite-text": "sqlite3",
              "postgres": "psycopg", "spark": "pyspark"}[engine]
    if importlib.util.find_spec(module) is None:
        return False
    return engine != "postgres" or "PGHOST" in os.environ


def main(binary, work, engines):
    raw = os.path.join(work, "raw.csv")
    header = generate(raw)
    site, x, w, c, y = header
    role_args = ["--site", site, "--x", x, "--y", y, "--w", w, "--covariate", c]
    STANDARD_QUERY[0] = pondus(binary, "sql", "--table", "trial rows", *role_args)
    b_path = os.path.join(work, "streamed.csv")
    pondus(binary, "sites", raw, *role_args, "--out", b_path, "--quiet")
    streamed = list(csv.reader(open(b_path, encoding="utf-8")))
    ok = True
    j_path = os.path.join(work, "one-stage-rows.json")
    pondus(binary, "sites", raw, *role_args, "--one-stage", "--json", j_path, "--quiet")
    with open(j_path, encoding="utf-8") as f:
        STREAMED_ONE_STAGE[0] = one_stage_numbers(json.load(f))
    if len(STREAMED_ONE_STAGE[0]) < 20:
        print(f"  the one-stage model gave only {len(STREAMED_ONE_STAGE[0])} numbers")
        ok = False
    # The data were built with one site too small and one without a product term.
    if len(streamed) - 1 != 39:
        print(f"  expected 39 estimated sites, got {len(streamed) - 1}")
        ok = False
    if not any(r[0] == "clinic-07" and r[5] == "" for r in streamed[1:]):
        print("  clinic-07 (constant w) should have an empty product term")
        ok = False
    if not engines:
        engines = [e for e in ("duckdb", "sqlite", "sqlite-text", "postgres", "spark") if available(e)]
    for engine in engines:
        ok = check_engine(binary, work, engine, raw, header, role_args, streamed) and ok
    sys.exit(0 if ok else 1)


if __name__ == "__main__":
    if len(sys.argv) < 3:
        sys.exit("usage: check.py PONDUS_BINARY WORK_DIR [ENGINE ...]")
    main(sys.argv[1], sys.argv[2], sys.argv[3:])
