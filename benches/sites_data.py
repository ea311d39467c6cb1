"""Writes the invented participant-row file of benches/sites_large.sh.

N rows (default 10,000,000) in 1,000 sites, interleaved row by row as in
benches/sites.rs (site = (i * 7919 + i // 1024) mod 1000, the worst case for a
previous-site cache), columns site, x, w, y with
    x = 10 u1 + 0.01 site,  w = 50 u2,
    y = 2 + 0.5 x + 0.1 w + 0.01 x w + u3 - 0.5,
u1, u2, u3 uniform from Python's seeded Mersenne Twister (random.Random), so
the same file on every machine. Invented data, for timing only.

Usage: python3 benches/sites_data.py N FILE
"""
import random
import sys


def main() -> None:
    n = int(sys.argv[1])
    path = sys.argv[2]
    rng = random.Random(20261203)
    u = rng.random
    with open(path, "w", newline="\n", buffering=1 << 20) as f:
        f.write("site,x,w,y\n")
        chunk = []
        for i in range(n):
            site = (i * 7919 + (i >> 10)) % 1000
            x = 10.0 * u() + site * 0.01
            w = 50.0 * u()
            y = 2.0 + 0.5 * x + 0.1 * w + 0.01 * x * w + u() - 0.5
            chunk.append(f"{site},{x:.4f},{w:.3f},{y:.4f}\n")
            if len(chunk) == 100_000:
                f.write("".join(chunk))
                chunk.clear()
        f.write("".join(chunk))


if __name__ == "__main__":
    main()
