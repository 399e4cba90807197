#!/usr/bin/env bash
# Times the benchmark job (bench/README.md, "The job") with two builds of
# manyfold back to back on the same files, alternating, REPS times at each
# size: a refactor's before and after, measured on the same machine within
# minutes of each other.
#
#   bench/ab.sh REV_A REV_B [ROWS...]     default ROWS: 1000000 10000000
#
# Environment: REPS (default 4), WORK (default /tmp/manyfold-ab),
# METHODS_A, METHODS_B (the --methods arguments of each build, default
# target:m=20+freq; builds before the encoding grammar took
# "target,freq --smoothing m=20"), TARGET (default late; cost for a
# regression target), EXTRA (more flags for both builds, for example
# "--scheme ordered"). Prints each run's wall seconds and peak
# RSS (GNU time), then the medians.
set -euo pipefail
here=$(cd "$(dirname "$0")" && pwd)
root=$(cd "$here/.." && pwd)
[ $# -ge 2 ] || { echo "usage: bench/ab.sh REV_A REV_B [ROWS...]" >&2; exit 2; }
revA=$1 revB=$2
shift 2
if [ $# -gt 0 ]; then ROWS=("$@"); else ROWS=(1000000 10000000); fi
REPS=${REPS:-4}
WORK=${WORK:-/tmp/manyfold-ab}
METHODS_A=${METHODS_A:-target:m=20+freq}
METHODS_B=${METHODS_B:-target:m=20+freq}
TARGET=${TARGET:-late}
EXTRA=${EXTRA:-}
mkdir -p "$WORK"
for side in A B; do
	rev=$revA
	[ $side = B ] && rev=$revB
	rm -rf "$WORK/src$side"
	git -C "$root" worktree add --detach "$WORK/src$side" "$rev" >/dev/null
	(cd "$WORK/src$side" && go build -o "$WORK/manyfold-$side" ./cmd/manyfold)
	git -C "$root" worktree remove --force "$WORK/src$side"
done
(cd "$here" && go build -o "$WORK/gen" ./cmd/gen)
: >"$WORK/results.txt"
for rows in "${ROWS[@]}"; do
	d=$WORK/data$rows
	[ -f "$d/shipments.parquet" ] || { mkdir -p "$d" && "$WORK/gen" --rows "$rows" --dir "$d" --formats parquet --no-folds-file >/dev/null; }
	for _ in $(seq "$REPS"); do
		for side in A B; do
			m=$METHODS_A
			[ $side = B ] && m=$METHODS_B
			rm -rf "$WORK/out" && mkdir "$WORK/out"
			# shellcheck disable=SC2086 # METHODS and EXTRA may hold several words
			/usr/bin/time -f '%e %M' -o "$WORK/t.txt" "$WORK/manyfold-$side" encode "$d/shipments.parquet" --target "$TARGET" \
				--columns dest_postcode,sender_account,shipment_id --methods $m --folds 5 --seed 3 --fold-column fold \
				--out "$WORK/out/o.parquet" --tables "$WORK/out/t" --threads 2 $EXTRA >/dev/null 2>&1
			echo "$rows $side $(cat "$WORK/t.txt")" | tee -a "$WORK/results.txt"
		done
	done
done
echo "medians (rows, build, wall s, peak RSS KB):"
median() { sort -n | awk '{ v[NR] = $1 } END { if (NR % 2) print v[(NR + 1) / 2]; else print (v[NR / 2] + v[NR / 2 + 1]) / 2 }'; }
for rows in "${ROWS[@]}"; do
	for side in A B; do
		w=$(awk -v r="$rows" -v s="$side" '$1 == r && $2 == s { print $3 }' "$WORK/results.txt" | median)
		m=$(awk -v r="$rows" -v s="$side" '$1 == r && $2 == s { print $4 }' "$WORK/results.txt" | median)
		echo "$rows $side $w $m"
	done
done
