#!/usr/bin/env python3
"""Writes an invented CSV of N studies with three moderators, for benchmarks only.

Usage: python3 benches/make_large_csv.py N OUT.csv   (seeded: the same file every time)
"""
import random
import sys


def main() -> None:
    n, out = int(sys.argv[1]), sys.argv[2]
    rng = random.Random(20261201)
    with open(out, "w", encoding="utf-8") as f:
        f.write("study,effect,variance,m1,m2,m3\n")
        for i in range(n):
            m1 = rng.gauss(0, 1)
            m2 = rng.random() * 10
            m3 = int(rng.random() * 4)
            v = 0.01 + 0.2 * rng.random()
            y = 0.2 + 0.1 * m1 - 0.02 * m2 + 0.05 * m3 + 0.1 * rng.gauss(0, 1) + v**0.5 * rng.gauss(0, 1)
            f.write(f"s{i},{y:.6f},{v:.6f},{m1:.4f},{m2:.4f},{m3}\n")


if __name__ == "__main__":
    main()
