#!/usr/bin/env python3
"""Compare freshly generated reference fixtures with the committed ones.

Usage: python compare.py [--rtol R] COMMITTED_DIR GENERATED_DIR

--rtol widens the relative tolerance for a whole folder whose values come
from an iterative optimiser (scipy's minimisers stop at about 1e-8 relative,
and another CPU or BLAS build moves the last digits: a fresh machine moved
the multilevel fixtures by up to 5e-8). The tight default stays for every
folder computed in closed form or by root finding to machine precision.

Every *.json and *.csv file must exist in both directories. JSON files must
have the same structure (keys, list lengths, null positions, strings,
booleans); every number must agree to a relative tolerance of 1e-9 or an
absolute tolerance of 1e-12. CSV files must have the same header and rows;
numeric cells are compared with the same tolerance, other cells exactly.
Strings under the top-level "source" object (library and python versions)
are reported when they differ but do not fail the comparison; numbers
there are still compared.

Exit status 0 when everything matches, 1 otherwise. Standard library only.
"""

import csv
import json
import math
import os
import sys

RTOL = 1e-9
ATOL = 1e-12
# Values found by scipy's bounded minimiser are accurate only to its own
# stopping tolerance (about 1e-8 relative here), which a different CPU or
# libm can move; they are cross-checks, not fixture values.
# The selection model's standard errors come from a finite-difference Hessian
# at that optimum, which carries about 1e-6 relative on its own (a fresh
# machine moved one weight SE by 1.4e-6), hence 1e-5 for these keys.
LOOSE_KEYS = ("minimize_scalar", "selection_ml")
LOOSE_RTOL = 1e-5
# The gap between the minimiser's value and the root-found one
# (crosschecks.*.abs_diff) is the minimiser's noise itself: generate.py
# asserts it is below 1e-5, and only that bound is reproducible across
# machines (a fresh venv on another CPU moved it from 7e-10 to 1e-10).
NOISE_KEY = "abs_diff"
NOISE_BOUND = 1e-5
MAX_REPORT = 50


class Comparer:
    def __init__(self, rtol=RTOL):
        self.rtol = rtol
        self.numbers = 0
        self.problems = []
        self.notes = []

    def problem(self, msg):
        self.problems.append(msg)

    def num_ok(self, a, b):
        if not (math.isfinite(a) and math.isfinite(b)):
            return a == b
        return abs(a - b) <= ATOL or abs(a - b) <= self.rtol * max(abs(a), abs(b))

    def value(self, path, a, b):
        # bool is a subclass of int in Python: handle it first
        if isinstance(a, bool) or isinstance(b, bool):
            if a is not b:
                self.problem(f"{path}: committed {a!r}, generated {b!r}")
            return
        a_num = isinstance(a, (int, float))
        b_num = isinstance(b, (int, float))
        if a_num or b_num:
            if not (a_num and b_num):
                self.problem(f"{path}: committed {a!r}, generated {b!r}")
                return
            self.numbers += 1
            if ".crosschecks." in path and path.endswith("." + NOISE_KEY):
                if not (0 <= a <= NOISE_BOUND and 0 <= b <= NOISE_BOUND):
                    self.problem(f"{path}: committed {a!r}, generated {b!r} (a cross-check gap above {NOISE_BOUND})")
                return
            loose = any(k in path for k in LOOSE_KEYS)
            if loose and math.isfinite(a) and math.isfinite(b) and abs(a - b) <= LOOSE_RTOL * max(abs(a), abs(b), 1e-300):
                return
            if not self.num_ok(float(a), float(b)):
                rel = abs(a - b) / max(abs(a), abs(b))
                self.problem(f"{path}: committed {a!r}, generated {b!r} (abs diff {abs(a - b):.3e}, rel {rel:.3e})")
            return
        if isinstance(a, dict) and isinstance(b, dict):
            for k in sorted(set(a) | set(b)):
                if k not in b:
                    self.problem(f"{path}.{k}: missing from generated output")
                elif k not in a:
                    self.problem(f"{path}.{k}: not in committed fixture")
                else:
                    self.value(f"{path}.{k}", a[k], b[k])
            return
        if isinstance(a, list) and isinstance(b, list):
            if len(a) != len(b):
                self.problem(f"{path}: committed list has {len(a)} items, generated {len(b)}")
                return
            for i, (x, y) in enumerate(zip(a, b)):
                self.value(f"{path}[{i}]", x, y)
            return
        if a != b:
            msg = f"{path}: committed {a!r}, generated {b!r}"
            if ":.source." in path and isinstance(a, str) and isinstance(b, str):
                self.notes.append(msg)
            else:
                self.problem(msg)

    def csv_file(self, name, pa, pb):
        with open(pa, newline="", encoding="utf-8") as fa, open(pb, newline="", encoding="utf-8") as fb:
            ra = list(csv.reader(fa))
            rb = list(csv.reader(fb))
        if len(ra) != len(rb):
            self.problem(f"{name}: committed has {len(ra)} lines, generated {len(rb)}")
            return
        for i, (la, lb) in enumerate(zip(ra, rb)):
            if len(la) != len(lb):
                self.problem(f"{name}:{i + 1}: committed has {len(la)} cells, generated {len(lb)}")
                continue
            for j, (ca, cb) in enumerate(zip(la, lb)):
                try:
                    fa_, fb_ = float(ca), float(cb)
                except ValueError:
                    if ca != cb:
                        self.problem(f"{name}:{i + 1}:{j + 1}: committed {ca!r}, generated {cb!r}")
                    continue
                self.numbers += 1
                if not self.num_ok(fa_, fb_):
                    self.problem(f"{name}:{i + 1}:{j + 1}: committed {ca}, generated {cb}")


def main():
    args = sys.argv[1:]
    rtol = RTOL
    if len(args) == 4 and args[0] == "--rtol":
        rtol = float(args[1])
        args = args[2:]
    if len(args) != 2 or not RTOL <= rtol <= 1e-5:
        print("usage: compare.py [--rtol R] COMMITTED_DIR GENERATED_DIR  (1e-9 <= R <= 1e-5)", file=sys.stderr)
        return 2
    committed, generated = args
    exts = (".json", ".csv")

    def listing(d):
        return sorted(f for f in os.listdir(d) if f.endswith(exts)) if os.path.isdir(d) else []

    files_c = listing(committed)
    files_g = listing(generated)
    c = Comparer(rtol)
    if not files_g:
        c.problem(f"generator wrote no fixture files into {generated}")
    for f in sorted(set(files_g) - set(files_c)):
        c.problem(f"{f}: generated but missing from {committed} (commit it, or regenerate the fixtures)")
    for f in sorted(set(files_c) - set(files_g)):
        c.problem(f"{f}: committed in {committed} but not produced by the generator")
    both = sorted(set(files_c) & set(files_g))
    for f in both:
        pa, pb = os.path.join(committed, f), os.path.join(generated, f)
        if f.endswith(".json"):
            try:
                with open(pa, encoding="utf-8") as fh:
                    a = json.load(fh)
            except ValueError as e:
                c.problem(f"{f}: committed file is not valid JSON: {e}")
                continue
            with open(pb, encoding="utf-8") as fh:
                b = json.load(fh)
            c.value(f + ":", a, b)
        else:
            c.csv_file(f, pa, pb)

    for n in c.notes:
        print(f"note (not a failure): {n}")
    if c.problems:
        print(f"reference fixtures DIFFER: {len(c.problems)} problem(s)", file=sys.stderr)
        for p in c.problems[:MAX_REPORT]:
            print(f"  {p}", file=sys.stderr)
        if len(c.problems) > MAX_REPORT:
            print(f"  ... and {len(c.problems) - MAX_REPORT} more", file=sys.stderr)
        print(f"reference fixtures: MISMATCH ({len(both)} files compared, {c.numbers} numbers checked, "
              f"{len(c.problems)} problems)")
        return 1
    print(f"reference fixtures: {len(both)} files, {c.numbers} numbers match")
    return 0


if __name__ == "__main__":
    sys.exit(main())
