"""The pandas groupby of benches/sites_large.sh: the per-site moments that
`pondus sites FILE --site site --x x --y y --w w` computes, from the same
file, and the two per-site OLS coefficients that follow from them.

Per site j: the count n_j, the means of v = (x, w, x*w, y) and the centred
co-moments C_j = sum_i (v_i - mean_j)(v_i - mean_j)' (deviations from the
site means, as pondus keeps them, not raw sums of squares); then
    slope_j       = C_xy / C_xx                     (y on x)
    interaction_j = coefficient of x*w in y on (x, w, x*w), from the 3 x 3
                    system C_zz b = C_zy of the centred co-moments.
Writes site,n,slope,interaction (sites sorted by id) to OUT, so that the
benchmark can check the numbers against pondus's effects file.

Usage: python sites_pandas.py FILE OUT
"""
import sys

import numpy as np
import pandas as pd


def main() -> None:
    path, out = sys.argv[1], sys.argv[2]
    df = pd.read_csv(path)
    df["xw"] = df["x"] * df["w"]
    cols = ["x", "w", "xw", "y"]
    groups = df.groupby("site", sort=True)
    n = groups.size()
    centred = df[cols] - groups[cols].transform("mean")
    pairs = [(a, b) for i, a in enumerate(cols) for b in cols[i:]]
    products = pd.DataFrame(
        {f"{a}*{b}": centred[a] * centred[b] for a, b in pairs}
    )
    products["site"] = df["site"]
    c = products.groupby("site", sort=True).sum()
    cm = lambda a, b: c[f"{a}*{b}"].to_numpy() if f"{a}*{b}" in c else c[f"{b}*{a}"].to_numpy()
    slope = cm("x", "y") / cm("x", "x")
    z = ["x", "w", "xw"]
    szz = np.stack([np.stack([cm(a, b) for b in z], axis=-1) for a in z], axis=-2)
    szy = np.stack([cm(a, "y") for a in z], axis=-1)
    beta = np.linalg.solve(szz, szy[..., None])[..., 0]
    result = pd.DataFrame(
        {"site": n.index, "n": n.to_numpy(), "slope": slope, "interaction": beta[:, 2]}
    )
    result.to_csv(out, index=False, float_format="%.17g")


if __name__ == "__main__":
    main()
