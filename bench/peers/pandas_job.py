"""The dataframe peer of manyfold's performance harness (pandas, CSV in, CSV out).

The job: for each of the columns, the out-of-fold m-estimate of the mean
target, (s + m*p) / (n + m) with n, s the level's rows and target sum and p
the mean target, all over the rows of the other folds (p alone when the level
has no rows there), and the level's row count over the whole table; all input
columns are kept and the fold is written as column "fold". A missing postcode
is a level of its own.

The fold of the row-th data row (0-based) is manyfold's row fold, computed
here from the row number: XXH64 of the row number as 8 little-endian bytes
with the seed, mod k (xxHash specification, doc/xxhash_spec.md: the
short-input path with one 8-byte lane, then the avalanche), in numpy's
wrapping uint64 arithmetic.

usage: python3 pandas_job.py IN.csv OUT.csv [--seed 3] [--folds 5] [--m 20]
"""

import argparse
import sys
import time

import numpy as np
import pandas as pd

P1 = np.uint64(11400714785074694791)
P2 = np.uint64(14029467366897019727)
P3 = np.uint64(1609587929392839161)
P4 = np.uint64(9650029242287828579)
P5 = np.uint64(2870177450012600261)


def rotl(x, r):
    return (x << np.uint64(r)) | (x >> np.uint64(64 - r))


def row_folds(n, seed, k):
    """manyfold's fold of rows 0..n-1: XXH64(le64(row), seed) mod k."""
    with np.errstate(over="ignore"):
        x = np.arange(n, dtype=np.uint64)
        h = np.full(n, np.uint64(seed) + P5 + np.uint64(8), dtype=np.uint64)
        h ^= rotl(x * P2, 31) * P1
        h = rotl(h, 27) * P1 + P4
        h ^= h >> np.uint64(33)
        h *= P2
        h ^= h >> np.uint64(29)
        h *= P3
        h ^= h >> np.uint64(32)
    return (h % np.uint64(k)).astype(np.int64)


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("inp")
    ap.add_argument("out")
    ap.add_argument("--target", default="late")
    ap.add_argument("--columns", default="dest_postcode,sender_account,shipment_id")
    ap.add_argument("--seed", type=int, default=3)
    ap.add_argument("--folds", type=int, default=5)
    ap.add_argument("--m", type=float, default=20.0)
    a = ap.parse_args()
    start = time.time()
    text = {c: str for c in ["shipment_id", "dest_postcode", "sender_account", "route", "parcel_type"]}
    df = pd.read_csv(a.inp, dtype=text, keep_default_na=False, na_values=[""])
    y = a.target
    df["fold"] = row_folds(len(df), a.seed, a.folds)
    # The prior of each fold: the mean target of the other folds' rows.
    pf = df.groupby("fold")[y].agg(["count", "sum"])
    prior = (pf["sum"].sum() - pf["sum"]) / (pf["count"].sum() - pf["count"])
    p = df["fold"].map(prior).to_numpy(dtype=np.float64)
    enc = {}
    for c in a.columns.split(","):
        lf = df.groupby([c, "fold"], dropna=False, sort=False)[y]
        lv = df.groupby(c, dropna=False, sort=False)[y]
        n = (lv.transform("count") - lf.transform("count")).to_numpy(dtype=np.float64)
        s = (lv.transform("sum") - lf.transform("sum")).to_numpy(dtype=np.float64)
        with np.errstate(invalid="ignore", divide="ignore"):
            enc[c + "_tmean"] = np.where(n == 0, p, (s + a.m * p) / (n + a.m))
        enc[c + "_freq"] = lv.transform("size").to_numpy(dtype=np.int64)
    out = pd.concat([df, pd.DataFrame(enc, index=df.index)], axis=1)
    out.to_csv(a.out, index=False)
    print(f"pandas_job: pandas {pd.__version__}: wrote {a.out} ({len(df)} rows) in {time.time() - start:.1f}s", file=sys.stderr)


if __name__ == "__main__":
    main()
