#!/usr/bin/env python3
"""Write the Parquet fixtures of issue 18 (tests/data/parquet/) with pyarrow.

Usage: python parquet_fixtures.py        (from anywhere; writes tests/data/parquet/)

pyarrow 26.0.1 (pinned in requirements.txt) writes every .parquet file, so
pondus's reader is tested on files made by the Apache Arrow C++ writer, not
by itself. The files are small and committed (as the spreadsheet fixtures of
tests/reference/spreadsheets.py are); check.sh does not run this script.
Each .parquet file that has a CSV twin is written from the same values, so
`pondus fit` / `pondus sites` on the two must give the same JSON apart from
the input record (tests/integration/parquet.rs).

Files (all data invented, seeded):
- participants.parquet / participants.csv: 600 participant rows in 12
  sites, written in row groups of 64 rows (10 groups), snappy-compressed,
  with page checksums (so the damaged-file test can rely on them).
  Columns: `site` (text; ids with spaces, a double quote and an apostrophe,
  e.g. `Ward "B" 3`), `x` (float64), `w` (int64), `c` (decimal(12,3)),
  `y` (float64 near 1e9: 1e9 + a few hundred), `arm` (bool, the 0/1 group
  of x's sign), `score_text` (numbers stored as text, = y - 1e9 as text),
  `small` (float32), `band` (uint8). Nulls: eight rows have one null among
  x, w, c or y (missing, left out as empty CSV cells are). The CSV holds the
  same values (floats by repr, the decimal as its text, the bool as 1/0,
  the float32 by numpy's shortest float32 text, nulls as empty cells).
- participants-zstd.parquet: the same table compressed with zstd, which this
  build of pondus does not decompress (the message test).
- studies.parquet: data-examples/classroom-extraction.csv typed column by
  column (a column whose cells are all whole numbers is int64, all numbers
  float64, otherwise text; empty cells are nulls; an all-empty column is a
  float64 of nulls), in row groups of 5 rows.
- bad-cells.parquet: 40 rows in 4 row groups of 10; row 7 has a null site,
  row 23 has `x` = "abc" (x is text), row 31 has `x` = "1,5".
- bad-types.parquet: site, x, y, and columns of unsupported types: `when`
  (date32), `stamp` (timestamp[us]), `tags` (list<int64>), `blob` (binary),
  `point` (struct<a: double>).
"""
import csv
import datetime
import decimal
import os
import random

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq

ROOT = os.path.normpath(os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", ".."))
OUT = os.path.join(ROOT, "tests", "data", "parquet")
SEED = 18003


def write_csv(path, header, rows):
    with open(path, "w", newline="", encoding="utf-8") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(header)
        w.writerows(rows)


def participants():
    rng = random.Random(SEED)
    sites = [f"clinic {k:02d}" for k in range(9)] + ['Ward "B" 3', "St. Anne's", "  padded  "]
    cols = {k: [] for k in ["site", "x", "w", "c", "y", "arm", "score_text", "small", "band"]}
    for i in range(600):
        s = sites[i % len(sites)]
        slope = 0.5 + 0.1 * (i % len(sites))
        x = rng.gauss(0, 1.5)
        w = rng.randint(20, 70)
        c = decimal.Decimal(rng.randint(-50000, 50000)) / 1000
        y = 1e9 + 300 + slope * x + 0.02 * w + 0.01 * x * w - 0.5 * float(c) + rng.gauss(0, 2)
        cols["site"].append(s)
        cols["x"].append(x)
        cols["w"].append(w)
        cols["c"].append(c)
        cols["y"].append(y)
        cols["arm"].append(x > 0)
        cols["score_text"].append(repr(y - 1e9))
        cols["small"].append(float(np.float32(rng.uniform(0, 10))))
        cols["band"].append(rng.randint(0, 4))
    for i in rng.sample(range(600), 8):
        cols[rng.choice(["x", "w", "c", "y"])][i] = None
    table = pa.table(
        {
            "site": pa.array(cols["site"], pa.string()),
            "x": pa.array(cols["x"], pa.float64()),
            "w": pa.array(cols["w"], pa.int64()),
            "c": pa.array(cols["c"], pa.decimal128(12, 3)),
            "y": pa.array(cols["y"], pa.float64()),
            "arm": pa.array(cols["arm"], pa.bool_()),
            "score_text": pa.array(cols["score_text"], pa.string()),
            "small": pa.array(cols["small"], pa.float32()),
            "band": pa.array(cols["band"], pa.uint8()),
        }
    )
    pq.write_table(table, os.path.join(OUT, "participants.parquet"), row_group_size=64,
                   compression="snappy", write_page_checksum=True)
    pq.write_table(table, os.path.join(OUT, "participants-zstd.parquet"), row_group_size=64,
                   compression="zstd")

    def text(k, v):
        if v is None:
            return ""
        if k in ("x", "y"):
            return repr(v)
        if k == "arm":
            return "1" if v else "0"
        if k == "small":
            return str(np.float32(v))
        return str(v)

    header = list(cols)
    rows = [[text(k, cols[k][i]) for k in header] for i in range(600)]
    write_csv(os.path.join(OUT, "participants.csv"), header, rows)


def studies():
    with open(os.path.join(ROOT, "data-examples", "classroom-extraction.csv"), encoding="utf-8",
              newline="") as f:
        rows = list(csv.reader(f))
    header, body = rows[0], rows[1:]
    arrays = {}
    for j, h in enumerate(header):
        cells = [r[j] for r in body]
        present = [c for c in cells if c.strip() != ""]

        def is_int(t):
            try:
                int(t)
                return True
            except ValueError:
                return False

        def is_num(t):
            try:
                float(t)
                return True
            except ValueError:
                return False

        if not present:
            arrays[h] = pa.array([None] * len(cells), pa.float64())
        elif all(is_int(c) for c in present):
            arrays[h] = pa.array([int(c) if c.strip() else None for c in cells], pa.int64())
        elif all(is_num(c) for c in present):
            arrays[h] = pa.array([float(c) if c.strip() else None for c in cells], pa.float64())
        else:
            arrays[h] = pa.array([c if c.strip() else None for c in cells], pa.string())
    pq.write_table(pa.table(arrays), os.path.join(OUT, "studies.parquet"), row_group_size=5)


def bad_cells():
    rng = random.Random(SEED + 1)
    site, x, y = [], [], []
    for i in range(40):
        site.append(f"s{i % 4}")
        x.append(repr(round(rng.gauss(0, 1), 6)))
        y.append(rng.gauss(0, 1))
    site[6] = None
    x[22] = "abc"
    x[30] = "1,5"
    table = pa.table({"site": pa.array(site, pa.string()), "x": pa.array(x, pa.string()),
                      "y": pa.array(y, pa.float64())})
    pq.write_table(table, os.path.join(OUT, "bad-cells.parquet"), row_group_size=10)


def bad_types():
    n = 6
    table = pa.table(
        {
            "site": pa.array(["a", "a", "a", "b", "b", "b"]),
            "x": pa.array([1.0, 2.0, 3.0, 1.0, 2.0, 4.0]),
            "y": pa.array([2.0, 4.1, 5.9, 1.0, 3.2, 7.1]),
            "when": pa.array([datetime.date(2020, 1, 1 + i) for i in range(n)], pa.date32()),
            "stamp": pa.array([datetime.datetime(2020, 1, 1, i) for i in range(n)],
                              pa.timestamp("us")),
            "tags": pa.array([[i, i + 1] for i in range(n)], pa.list_(pa.int64())),
            "blob": pa.array([bytes([i]) for i in range(n)], pa.binary()),
            "point": pa.array([{"a": float(i)} for i in range(n)],
                              pa.struct([("a", pa.float64())])),
        }
    )
    pq.write_table(table, os.path.join(OUT, "bad-types.parquet"))


def main():
    os.makedirs(OUT, exist_ok=True)
    participants()
    studies()
    bad_cells()
    bad_types()
    print("pyarrow", pa.__version__, "wrote", sorted(os.listdir(OUT)))


if __name__ == "__main__":
    main()
