#!/usr/bin/env python3
"""Min and median of the timed runs of benches/fit_large.sh and benches/sites_large.sh.

Usage: python3 benches/summarise_times.py LOG KIND [KIND ...]
LOG holds one line per run, "KIND WALL USER SYS MAXRSS_KB" (from /usr/bin/time
-f "%e %U %S %M"); prints, per KIND in the order given, min / median of wall,
user and user + system seconds and the largest peak memory.
"""
import statistics
import sys


def main() -> None:
    log, kinds = sys.argv[1], sys.argv[2:]
    with open(log, encoding="utf-8") as f:
        runs = [line.split() for line in f if line.strip()]
    for kind in kinds:
        rows = [r for r in runs if r[0] == kind]
        if not rows:
            continue
        w = [float(r[1]) for r in rows]
        u = [float(r[2]) for r in rows]
        c = [float(r[2]) + float(r[3]) for r in rows]
        m = [int(r[4]) for r in rows]
        print(f"  {kind:10} wall {min(w):.2f} / {statistics.median(w):.2f}"
              f"   user {min(u):.2f} / {statistics.median(u):.2f}"
              f"   user+sys {min(c):.2f} / {statistics.median(c):.2f}   RSS {max(m)/1024:.0f} MB")


if __name__ == "__main__":
    main()
