"""Summarises bench/run.sh's results.tsv: medians per case and the ratios
manyfold/peer, then manyfold's growth with the rows. usage: report.py results.tsv"""

import statistics
import sys
from collections import defaultdict

runs = defaultdict(list)
order = []
for line in open(sys.argv[1]):
    rows, inp, out, tool, threads, wall, kb = line.rstrip("\n").split("\t")
    key = (int(rows), inp, out, tool, int(threads))
    if key not in runs:
        order.append(key)
    runs[key].append((float(wall), int(kb) / 1024))

med = {k: (statistics.median(w for w, _ in v), statistics.median(m for _, m in v), len(v)) for k, v in runs.items()}


def mf_key(k):
    """The manyfold run a peer's run compares with: same rows, formats, threads."""
    rows, inp, out, tool, threads = k
    if tool == "duckdb":
        return (rows, inp, out, "manyfold", threads)
    if tool == "pandas":
        return (rows, inp, out, "manyfold", 2)
    return None


print("| rows | input | output | tool | threads | runs | median wall s | median peak RSS MB | manyfold/peer wall | manyfold/peer RSS |")
print("|---:|---|---|---|---:|---:|---:|---:|---:|---:|")
for k in order:
    rows, inp, out, tool, threads = k
    w, m, n = med[k]
    rw = rm = ""
    mk = mf_key(k)
    if mk in med:
        rw = f"{med[mk][0] / w:.2f}x"
        rm = f"{med[mk][1] / m:.2f}x"
    print(f"| {rows:,} | {inp} | {out} | {tool} | {threads} | {n} | {w:.2f} | {m:.0f} | {rw} | {rm} |")

print()
print("manyfold, Parquet->Parquet, 2 threads: seconds per million rows")
for k in order:
    rows, inp, out, tool, threads = k
    if tool == "manyfold" and inp == "parquet" and out == "parquet" and threads == 2:
        print(f"  {rows:>12,} rows: {med[k][0] / (rows / 1e6):.2f} s/M rows, {med[k][1]:.0f} MB")
for k in order:
    if k[3] == "manyfold, no shipment_id":
        print(f"  without shipment_id, {k[0]:>12,} rows: {med[k][0]:.1f} s, peak RSS {med[k][1]:.0f} MB")
