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

# The growth: from the rounds that ran every size back to back where the
# harness had them, else from the runs beside the peers.
growth = [k for k in order if k[3] == "manyfold, growth"]
label = "every size in each round, back to back"
if not growth:
    growth = [k for k in order if k[3] == "manyfold" and k[1] == "parquet" and k[2] == "parquet" and k[4] == 2]
    label = "the runs beside the peers"
print()
print(f"manyfold, Parquet->Parquet, 2 threads: seconds per million rows ({label})")
per_m = []
for k in growth:
    per_m.append(med[k][0] / (k[0] / 1e6))
    print(f"  {k[0]:>12,} rows: {per_m[-1]:.2f} s/M rows, {med[k][1]:.0f} MB")
if per_m:
    print(f"  the largest {100 * (max(per_m) / min(per_m) - 1):.0f}% above the smallest (target: within 15%)")
noid = [k for k in order if k[3] == "manyfold, no shipment_id"]
for k in noid:
    print(f"  without shipment_id, {k[0]:>12,} rows: {med[k][0]:.1f} s, peak RSS {med[k][1]:.0f} MB (median of {med[k][2]})")
if len(noid) >= 2:
    print(f"  peak RSS without shipment_id at {noid[-1][0]:,} rows {100 * (med[noid[-1]][1] / med[noid[0]][1] - 1):+.0f}% of that at {noid[0][0]:,} (target: within 10%)")
for k in order:
    if k[3].startswith("manyfold, no shipment_id, levels of") and noid:
        print(f"  the {noid[0][0]:,}-row table written over to {k[0]:,} rows (the same levels): {med[k][0]:.1f} s, peak RSS {med[k][1]:.0f} MB, {100 * (med[k][1] / med[noid[0]][1] - 1):+.0f}% (median of {med[k][2]})")
