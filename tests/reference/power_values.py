"""Reference values for src/plan (planning the power of a moderator test).

Independent of pondus: scipy's noncentral chi-square and noncentral F, the
closed-form z-test power, and plain-Python xoshiro256** / SplitMix64 written
from Vigna's published C reference (prng.di.unimi.it). Run with
target/reference-venv/bin/python tests/reference/power_values.py and paste the
printed values into src/plan/ (the unit tests name scipy's version).
"""
import scipy
from scipy import stats

print("scipy", scipy.__version__)
M = (1 << 64) - 1

print("# ncx2 sf (x, df, nc, value)")
for x, df, nc in [(3.841458820694124, 1, 0.5), (3.841458820694124, 1, 7.84),
                  (3.841458820694124, 1, 40.0), (10.0, 3, 2.5), (0.5, 2, 1.0),
                  (500.0, 1, 450.0), (6.634896601021214, 1, 12.0)]:
    print(f"({x!r}, {df}.0, {nc!r}, {float(stats.ncx2.sf(x, df, nc))!r}),")
print("# ncx2 cdf")
for x, df, nc in [(3.841458820694124, 1, 7.84), (10.0, 3, 2.5), (0.5, 2, 1.0)]:
    print(f"({x!r}, {df}.0, {nc!r}, {float(stats.ncx2.cdf(x, df, nc))!r}),")
print("# ncf sf (x, df1, df2, nc, value)")
for x, d1, d2, nc in [(4.0, 1, 10, 5.0), (5.317655071578714, 1, 8, 7.84),
                      (2.5, 2, 20, 3.0), (1.0, 1, 3, 0.3), (4.0, 1, 200, 30.0)]:
    print(f"({x!r}, {d1}.0, {d2}.0, {nc!r}, {float(stats.ncf.sf(x, d1, d2, nc))!r}),")

def splitmix(seed):
    s = seed
    while True:
        s = (s + 0x9E3779B97F4A7C15) & M
        z = s
        z = ((z ^ (z >> 30)) * 0xBF58476D1CE4E5B9) & M
        z = ((z ^ (z >> 27)) * 0x94D049BB133111EB) & M
        yield z ^ (z >> 31)

def rotl(x, k):
    return ((x << k) | (x >> (64 - k))) & M

def xoshiro(s):
    s = list(s)
    while True:
        r = (rotl((s[1] * 5) & M, 7) * 9) & M
        t = (s[1] << 17) & M
        s[2] ^= s[0]; s[3] ^= s[1]; s[1] ^= s[2]; s[0] ^= s[3]
        s[2] ^= t; s[3] = rotl(s[3], 45)
        yield r

import numpy as np
print("# whole planning problems: (measure, k, n, tau2, design, B, alpha, z power closed form, ncF approx)")
def plan(measure, k, n, tau2, design, B, alpha, var=None):
    if measure == "r":
        v = 1.0 / (n - 3)
    elif measure == "smd":
        nt = nc = n / 2
        v = (nt + nc) / (nt * nc)
    else:
        v = var
    w = 1.0 / (v + tau2)
    if design[0] == "share":
        m = round(design[1] * k)
        x = np.array([0.0] * (k - m) + [1.0] * m)
    else:
        x = np.linspace(-1, 1, k)
        x = x / x.std(ddof=1) * design[1]
    xbar = np.sum(w * x) / np.sum(w * np.ones(k))
    S = np.sum(w * (x - xbar) ** 2)
    d = B * np.sqrt(S)
    zc = stats.norm.ppf(1 - alpha / 2)
    zp = stats.norm.cdf(d - zc) + stats.norm.cdf(-d - zc)
    fc = stats.f.ppf(1 - alpha, 1, k - 2)
    fp = stats.ncf.sf(fc, 1, k - 2, B * B * S)
    return float(zp), float(fp)
for case in [("r", 20, 50, 0.02, ("share", 0.5), 0.2, 0.05, None),
             ("smd", 30, 80, 0.05, ("sd", 10.0), 0.02, 0.05, None),
             ("effect", 12, 0, 0.01, ("share", 0.25), 0.3, 0.01, 0.04),
             ("r", 40, 100, 0.0, ("sd", 1.0), 0.05, 0.05, None)]:
    print(case, plan(*case))
g = splitmix(1234567)
print("# splitmix64 seed 1234567:", [next(g) for _ in range(5)])
g = xoshiro([1, 2, 3, 4])
print("# xoshiro256** state [1,2,3,4]:", [next(g) for _ in range(6)])
sm = splitmix(42)
g = xoshiro([next(sm) for _ in range(4)])
print("# xoshiro256** seeded by splitmix64(42):", [next(g) for _ in range(3)])

print("# smallest k with z power >= 0.8 for the first planning problem (r, n 50, tau2 0.02, share 0.5, B 0.2)")
for k in range(3, 1001):
    if plan("r", k, 50, 0.02, ("share", 0.5), 0.2, 0.05)[0] >= 0.8:
        print("k_needed", k, plan("r", k, 50, 0.02, ("share", 0.5), 0.2, 0.05)[0])
        break
print("# smallest n with z power >= 0.8 at k = 20 for the same problem")
for n in range(4, 100001):
    if plan("r", 20, n, 0.02, ("share", 0.5), 0.2, 0.05)[0] >= 0.8:
        print("n_needed", n)
        break

print("# unequal planned n (repeated in order): r, n [30, 60, 120], k 6 and 10, tau2 0.01, share 0.5, B 0.3")
def plan_list(k, ns, tau2, share, B, alpha):
    n = np.array([ns[i % len(ns)] for i in range(k)], dtype=float)
    w = 1.0 / (1.0 / (n - 3) + tau2)
    m = round(share * k)
    x = np.array([0.0] * (k - m) + [1.0] * m)
    xbar = np.sum(w * x) / np.sum(w)
    S = np.sum(w * (x - xbar) ** 2)
    d = B * np.sqrt(S)
    zc = stats.norm.ppf(1 - alpha / 2)
    return float(stats.norm.cdf(d - zc) + stats.norm.cdf(-d - zc))
for k in (6, 10):
    print(k, plan_list(k, [30, 60, 120], 0.01, 0.5, 0.3, 0.05))
