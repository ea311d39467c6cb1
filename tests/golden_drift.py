#!/usr/bin/env python3
"""How far the golden outputs moved: compares every file in tests/golden/
with its version at a git revision (default HEAD), number by number.

A change that only reorders floating-point sums (or lets a τ² search stop
at another point within its tolerance) moves the last digits of the JSON,
CSV and SVG numbers and nothing else. This script checks that claim before
the goldens are rewritten: the text between the numbers must be identical,
and each pair of numbers must agree to REL relative (or ABS absolute, for
values that are zero in exact arithmetic). A number printed to d decimals
may also move by one unit in its last place (a rounding that flipped); those
are listed for a reader to look at, as are changed hashes of binary files.

Usage: python3 tests/golden_drift.py [REV] [--rel 1e-10] [--abs 1e-13]
Exit status 1 when anything differs beyond the tolerances.
"""
import argparse
import pathlib
import re
import subprocess
import sys

NUMBER = re.compile(r"[-+]?(?:\d+\.\d*|\.\d+|\d+)(?:[eE][-+]?\d+)?")


def split(line):
    """The text between numbers and the numbers (as strings), alternating."""
    return NUMBER.split(line), NUMBER.findall(line)


def decimals(s):
    mantissa = re.split(r"[eE]", s)[0]
    return len(mantissa.split(".")[1]) if "." in mantissa else 0


def compare(path, old, new, rel, abs_tol, report):
    worst = 0.0
    old_lines, new_lines = old.splitlines(), new.splitlines()
    if len(old_lines) != len(new_lines):
        report.append(f"{path}: {len(old_lines)} lines before, {len(new_lines)} now")
        return worst
    for n, (a, b) in enumerate(zip(old_lines, new_lines), 1):
        if a == b:
            continue
        (ta, na), (tb, nb) = split(a), split(b)
        if ta != tb or len(na) != len(nb):
            if "sha256" in a.lower() or re.search(r"[0-9a-f]{64}", a):
                report.append(f"{path}:{n}: hash changed (look at the file): {b[:100]}")
            else:
                report.append(f"{path}:{n}: text differs\n  - {a[:160]}\n  + {b[:160]}")
            continue
        for x, y in zip(na, nb):
            if x == y:
                continue
            fx, fy = float(x), float(y)
            scale = max(abs(fx), abs(fy))
            if abs(fx - fy) <= abs_tol:
                continue
            r = abs(fx - fy) / scale
            d = max(decimals(x), decimals(y))
            if r > rel and "e" not in (x + y).lower() and d <= 6 and abs(abs(fx - fy) - 10.0**-d) < 10.0**-(d + 3):
                report.append(f"{path}:{n}: last printed digit moved: {x} → {y}")
                continue
            worst = max(worst, r)
            if r > rel:
                report.append(f"{path}:{n}: {x} → {y} (relative {r:.1e})")
    return worst


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("rev", nargs="?", default="HEAD")
    ap.add_argument("--rel", type=float, default=1e-10)
    ap.add_argument("--abs", type=float, default=1e-13, dest="abs_tol")
    args = ap.parse_args()
    root = pathlib.Path(__file__).resolve().parent.parent
    report, worst, moved = [], 0.0, 0
    for path in sorted((root / "tests" / "golden").glob("*.txt")):
        name = path.relative_to(root).as_posix()
        try:
            old = subprocess.run(["git", "show", f"{args.rev}:{name}"], cwd=root, check=True,
                                 capture_output=True, text=True).stdout
        except subprocess.CalledProcessError:
            report.append(f"{name}: new file")
            continue
        new = path.read_text()
        if old != new:
            moved += 1
            worst = max(worst, compare(name, old, new, args.rel, args.abs_tol, report))
    print(f"{moved} golden files differ from {args.rev}; largest relative change "
          f"of a number {worst:.2e} (tolerance {args.rel:g} relative, {args.abs_tol:g} absolute)")
    for line in report:
        print(line)
    return 1 if report else 0


if __name__ == "__main__":
    sys.exit(main())
