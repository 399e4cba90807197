#!/usr/bin/env bash
# Times the benchmark job on the 8-part dataset of ROWS rows, alternating
# the plain binary over the one file of those rows (one), over the
# directory of the 8 parts (plain), and the Beam pipeline on the prism
# runner in its process (cmd/manyfold-beam, beam), REPS times each, and
# checks once that all three wrote the same bytes: the one file's output
# against the directory's, and the
# pipeline's encoded parts concatenated against the plain output, and the
# mapping tables, the manifest with its training scores.
#
#   bench/beam.sh [ROWS]        default ROWS: 10000000
#
# Environment: REPS (default 3), WORK (default /tmp/manyfold-beam-bench),
# WAYS (default "one plain beam"; "one plain" compares the one file with
# the directory alone, and skips the byte checks).
# Prints each run's wall seconds and peak RSS (GNU time), then the medians.
set -euo pipefail
here=$(cd "$(dirname "$0")" && pwd)
root=$(cd "$here/.." && pwd)
ROWS=${1:-10000000}
REPS=${REPS:-3}
WORK=${WORK:-/tmp/manyfold-beam-bench}
WAYS=${WAYS:-one plain beam}
mkdir -p "$WORK"
(cd "$root" && go build -o "$WORK/manyfold" ./cmd/manyfold)
(cd "$root/cmd/manyfold-beam" && go build -o "$WORK/manyfold-beam" .)
(cd "$here" && go build -o "$WORK/gen" ./cmd/gen)
d=$WORK/data$ROWS
[ -d "$d/shipments.parts" ] && [ -f "$d/shipments.parquet" ] || "$WORK/gen" --rows "$ROWS" --dir "$d" --formats parquet --parts 8 --no-folds-file >/dev/null
cols=dest_postcode,sender_account,shipment_id
methods=target:m=20+freq
: >"$WORK/results.txt"
for rep in $(seq "$REPS"); do
	for way in $WAYS; do
		# Each run starts with the disk idle: the output of the run before
		# (a gigabyte of CSV) written back first, not during this one.
		rm -rf "${WORK:?}/$way" && mkdir -p "$WORK/$way"
		[ "$way" = beam ] && rmdir "$WORK/beam"
		sync
		case $way in
		one | plain)
			in=$d/shipments.parquet
			[ "$way" = plain ] && in=$d/shipments.parts
			/usr/bin/time -f '%e %M' -o "$WORK/t.txt" "$WORK/manyfold" encode "$in" --target late \
				--columns "$cols" --methods "$methods" --folds 5 --seed 3 --threads 2 \
				--out "$WORK/$way/o.csv" --tables "$WORK/$way/t" >/dev/null 2>&1
			;;
		beam)
			/usr/bin/time -f '%e %M' -o "$WORK/t.txt" "$WORK/manyfold-beam" -input "$d/shipments.parts/part-*.parquet" \
				-target late -columns "$cols" -methods "$methods" -folds 5 -seed 3 -format csv \
				-out "$WORK/beam/out" -tables "$WORK/beam/t" >"$WORK/beam.log" 2>&1
			;;
		esac
		echo "$way $(cat "$WORK/t.txt")" | tee -a "$WORK/results.txt"
	done
	if [ "$rep" = 1 ] && [ "$WAYS" = "one plain beam" ]; then
		parts=("$WORK"/beam/out/part-*.csv)
		{ head -n 1 "${parts[0]}"; for p in "${parts[@]}"; do tail -n +2 "$p"; done; } | cmp - "$WORK/plain/o.csv"
		for f in "$WORK"/plain/t/*.parquet; do cmp "$f" "$WORK/beam/t/$(basename "$f")"; done
		cmp "$WORK/plain/t/manifest.json" "$WORK/beam/t/manifest.json"
		cmp "$WORK/one/o.csv" "$WORK/plain/o.csv"
		for f in "$WORK"/one/t/*; do cmp "$f" "$WORK/plain/t/$(basename "$f")"; done
		echo "same bytes: the encoded rows and the mapping tables, all three ways"
	fi
done
median() { sort -n | awk '{ v[NR] = $1 } END { if (NR % 2) print v[(NR + 1) / 2]; else print (v[NR / 2] + v[NR / 2 + 1]) / 2 }'; }
echo "medians (way, wall s, peak RSS KB):"
for way in $WAYS; do
	echo "$way $(awk -v w="$way" '$1 == w { print $2 }' "$WORK/results.txt" | median) $(awk -v w="$way" '$1 == w { print $3 }' "$WORK/results.txt" | median)"
done
