#!/usr/bin/env python3
"""The SQL route of `pondus sites` at scale: 100 million invented participant rows.

Usage: python scale.py PONDUS_BINARY WORK_DIR [--rows N] [--sites S] [--runs R] [--spark]

Not run by CI (it takes minutes and several GB of disk): the figures it
prints go into docs/performance.md. Needs duckdb (and pyspark with a Java
runtime for --spark), pinned in tests/sql/requirements.txt.

1. DuckDB generates N rows (default 100,000,000) in S sites (default 10,000)
   inside a database file in WORK_DIR, from range() and random() after
   setseed(0.18) on one thread (so the rows are the same on every run; the
   queries then use every thread): x ~ N(site shift, 1), w ~ N(50, 10) (Box-Muller
   on random()), y = 1 + b_j x + 0.02 w + 0.01 x w + N(0, 2), with b_j
   depending on the site; about one row in 10,000 has a NULL y. Also a
   table of site characteristics (`size`, correlated with b_j).
2. Runs the query `pondus sql --engine duckdb` prints R times, timing each
   (wall clock, the result fetched), and writes the moments table as CSV.
3. Times `pondus sites --moments` on it with --info and --fit (the two-stage
   answer: per-site slopes and interactions, then the meta-regression of the
   slopes on `size`), R times.
4. With --spark: exports the rows to Parquet from DuckDB (snappy), reads
   them in Spark local mode (local[*]) as a view, runs the query `pondus sql
   --engine spark` prints R times (timing each, result collected), and prints
   the largest difference between the Spark and the DuckDB moments.

Prints one line per timed step: the step, each run's seconds, min and median.
"""

import argparse
import csv
import math
import os
import statistics
import subprocess
import sys
import time

import duckdb


def sql_for(pondus, engine, table):
    out = subprocess.run(
        [pondus, "sql", "--engine", engine, "--table", table, "--site", "site", "--x", "x",
         "--y", "y", "--w", "w"],
        check=True, capture_output=True, text=True)
    return out.stdout


def report(step, times):
    print(f"{step}: runs " + ", ".join(f"{t:.2f}" for t in times)
          + f" s; min {min(times):.2f} s, median {statistics.median(times):.2f} s", flush=True)


def write_moments(path, columns, rows):
    with open(path, "w", newline="", encoding="utf-8") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(columns)
        for r in rows:
            w.writerow(["" if v is None else (repr(v) if isinstance(v, float) else v) for v in r])


def generate(con, n, sites):
    con.execute("SET threads = 1")
    con.execute("SELECT setseed(0.18)")
    con.execute("DROP TABLE IF EXISTS rows")
    con.execute(f"""
        CREATE TABLE rows AS
        WITH g AS (
            SELECT range AS i, (range % {sites}) AS s,
                   random() AS u1, random() AS u2, random() AS u3, random() AS u4, random() AS u5
            FROM range({n})
        )
        SELECT 'site ' || lpad(CAST(s AS VARCHAR), 5, '0') AS site,
               x, w,
               CASE WHEN u5 < 0.0001 THEN NULL ELSE
                 1 + (0.5 + (s % 100) / 100.0) * x + 0.02 * w + 0.01 * x * w
                   + 2 * sqrt(-2 * ln(1 - u3)) * cos(2 * pi() * u4) END AS y
        FROM (
            SELECT i, s, u3, u4, u5,
                   (s % 7) / 7.0 + sqrt(-2 * ln(1 - u1)) * cos(2 * pi() * u2) AS x,
                   50 + 10 * sqrt(-2 * ln(1 - u1)) * sin(2 * pi() * u2) AS w
            FROM g
        )
    """)
    con.execute("DROP TABLE IF EXISTS info")
    con.execute(f"""
        CREATE TABLE info AS
        SELECT 'site ' || lpad(CAST(range AS VARCHAR), 5, '0') AS site,
               (range % 100) + 10 * random() AS size
        FROM range({sites})
    """)
    con.execute("RESET threads")


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("pondus")
    ap.add_argument("work")
    ap.add_argument("--rows", type=int, default=100_000_000)
    ap.add_argument("--sites", type=int, default=10_000)
    ap.add_argument("--runs", type=int, default=3)
    ap.add_argument("--spark", action="store_true")
    ap.add_argument("--stream", type=int, default=0,
                    help="also time the streaming pass of pondus sites on the first N rows, "
                         "as Parquet and as CSV (exported by DuckDB), with its peak memory")
    ap.add_argument("--keep", action="store_true", help="reuse the database if present")
    ap.add_argument("--only-spark", action="store_true",
                    help="skip the DuckDB timings and pondus sites (needs the moments of an "
                         "earlier run for the comparison: runs the DuckDB query once)")
    a = ap.parse_args()
    os.makedirs(a.work, exist_ok=True)
    db = os.path.join(a.work, "rows.duckdb")
    fresh = not (a.keep and os.path.exists(db))
    con = duckdb.connect(db)
    con.execute("SET enable_progress_bar = false")
    threads = con.execute("SELECT current_setting('threads')").fetchone()[0]
    print(f"duckdb {duckdb.__version__}; threads {threads}", flush=True)
    if fresh:
        t = time.perf_counter()
        generate(con, a.rows, a.sites)
        print(f"generate {a.rows:,} rows in {a.sites:,} sites (one thread): {time.perf_counter() - t:.1f} s",
              flush=True)
    count = con.execute("SELECT COUNT(*) FROM rows").fetchone()[0]
    print(f"rows in the table: {count:,}", flush=True)
    info = os.path.join(a.work, "info.csv")
    con.execute(f"COPY info TO '{info}' (HEADER, DELIMITER ',')")

    query = sql_for(a.pondus, "duckdb", "rows")
    times, result = [], None
    if a.only_spark:
        cur = con.execute(query)
        spark_route(a, con, ([d[0] for d in cur.description], cur.fetchall()))
        return
    for _ in range(a.runs):
        t = time.perf_counter()
        cur = con.execute(query)
        rows = cur.fetchall()
        times.append(time.perf_counter() - t)
        result = ([d[0] for d in cur.description], rows)
    report("duckdb moments query", times)
    moments = os.path.join(a.work, "moments.csv")
    write_moments(moments, *result)
    print(f"moments table: {len(result[1]):,} sites", flush=True)

    times = []
    for k in range(a.runs):
        out = os.path.join(a.work, f"effects{k}.csv")
        js = os.path.join(a.work, f"sites{k}.json")
        t = time.perf_counter()
        subprocess.run(
            [a.pondus, "sites", "--moments", moments, "--site", "site", "--x", "x", "--y", "y",
             "--w", "w", "--info", info, "--fit", "--moderator", "size", "--out", out,
             "--json", js, "--quiet"],
            check=True)
        times.append(time.perf_counter() - t)
    report("pondus sites --moments (two-stage, --fit on size)", times)

    # The same moments as a Parquet file written by DuckDB: pondus must give
    # the same effects file as from the CSV.
    mpq = os.path.join(a.work, "moments.parquet")
    # (From the CSV just written: DuckDB's parallel sums can differ in the last
    # digit from one execution of the query to the next.)
    con.execute(f"COPY (SELECT * FROM read_csv('{moments}', header = true, "
                f"types = {{'site': 'VARCHAR'}})) TO '{mpq}' (FORMAT parquet)")
    out = os.path.join(a.work, "effects-pq.csv")
    subprocess.run(
        [a.pondus, "sites", "--moments", mpq, "--site", "site", "--x", "x", "--y", "y",
         "--w", "w", "--out", out, "--quiet"], check=True)
    subprocess.run(
        [a.pondus, "sites", "--moments", moments, "--site", "site", "--x", "x", "--y", "y",
         "--w", "w", "--out", out + ".csv", "--quiet"], check=True)
    same = open(out, encoding="utf-8").read() == open(out + ".csv", encoding="utf-8").read()
    print(f"moments as Parquet (DuckDB COPY) give the same effects file as the CSV: {same}",
          flush=True)
    assert same

    if a.stream:
        stream_route(a, con)
    if a.spark:
        spark_route(a, con, result)


def stream_route(a, con):
    """`pondus sites` reading N participant rows itself, from Parquet and from CSV."""
    base = os.path.join(a.work, f"head{a.stream}")
    if not os.path.exists(base + ".parquet"):
        con.execute(f"COPY (SELECT * FROM rows LIMIT {a.stream}) TO '{base}.parquet' "
                    "(FORMAT parquet, COMPRESSION snappy, ROW_GROUP_SIZE 1000000)")
        con.execute(f"COPY (SELECT * FROM rows LIMIT {a.stream}) TO '{base}.csv' (HEADER)")
    for ext in ("parquet", "csv"):
        f = f"{base}.{ext}"
        times, peaks = [], []
        for k in range(a.runs):
            out = os.path.join(a.work, f"stream-{ext}{k}.csv")
            t = time.perf_counter()
            r = subprocess.run(
                ["/usr/bin/time", "-f", "%M", a.pondus, "sites", f, "--site", "site", "--x", "x",
                 "--y", "y", "--w", "w", "--out", out, "--quiet"],
                check=True, capture_output=True, text=True)
            times.append(time.perf_counter() - t)
            peaks.append(int(r.stderr.strip().splitlines()[-1]) / 1024)
        report(f"pondus sites on {a.stream:,} rows from {ext.upper()} "
               f"({os.path.getsize(f) / 1e6:.0f} MB; peak memory "
               f"{min(peaks):.1f}-{max(peaks):.1f} MB)", times)
    same = (open(os.path.join(a.work, "stream-parquet0.csv"), encoding="utf-8").read()
            == open(os.path.join(a.work, "stream-csv0.csv"), encoding="utf-8").read())
    print(f"effects file from the Parquet rows = from the CSV rows: {same}", flush=True)


def spark_route(a, con, duck):
    from pyspark.sql import SparkSession

    pq = os.path.join(a.work, "rows.parquet")
    if not os.path.exists(pq):
        t = time.perf_counter()
        con.execute(f"COPY rows TO '{pq}' (FORMAT parquet, COMPRESSION snappy)")
        print(f"export to Parquet (DuckDB): {time.perf_counter() - t:.1f} s, "
              f"{os.path.getsize(pq) / 1e9:.2f} GB", flush=True)
    spark = (SparkSession.builder.master("local[*]").appName("pondus-scale")
             .config("spark.driver.memory", "4g")
             .config("spark.sql.shuffle.partitions", "8")
             .config("spark.ui.enabled", "false").getOrCreate())
    spark.sparkContext.setLogLevel("ERROR")
    print(f"spark {spark.version}", flush=True)
    spark.read.parquet(pq).createOrReplaceTempView("rows")
    query = sql_for(a.pondus, "spark", "rows")
    times, got = [], None
    for _ in range(a.runs):
        t = time.perf_counter()
        got = spark.sql(query).collect()
        times.append(time.perf_counter() - t)
    report("spark moments query (local[*], from Parquet)", times)
    cols, rows = duck
    want = {r[0]: r for r in rows}
    worst = 0.0
    for r in got:
        w = want[r[0]]
        for g, v in zip(list(r)[1:], w[1:]):
            if g is None or v is None:
                assert g is None and v is None, (r[0], g, v)
                continue
            worst = max(worst, abs(g - v) / max(abs(v), 1.0))
    assert len(got) == len(rows), (len(got), len(rows))
    print(f"spark vs duckdb moments: {len(got):,} sites, largest difference relative to "
          f"max(|value|, 1): {worst:.2e}", flush=True)
    spark.stop()


if __name__ == "__main__":
    sys.exit(main())
