#!/usr/bin/env bash
# manyfold's performance harness: the same encode job on the same file, on
# the same machine, in one run, by manyfold and by its peers (DuckDB SQL
# through bench/cmd/sqljob, a pandas script), alternating, REPS times each.
#
#   bench/run.sh [ROWS...]            default: 1000000 10000000
#
# Environment: REPS (default 3), WORK (data and outputs, default
# /tmp/manyfold-bench), GROWTH_ROWS (row counts of the RSS check without
# shipment_id, default "10000000 30000000"; "" skips it), MF_ONLY_ROWS (row
# counts at which only manyfold runs the job, Parquet to Parquet with 2
# threads, for the growth of its wall time beside ROWS; default
# "30000000", "" skips it), PEERS (default "duckdb pandas").
set -euo pipefail

here=$(cd "$(dirname "$0")" && pwd)
root=$(cd "$here/.." && pwd)
REPS=${REPS:-3}
WORK=${WORK:-/tmp/manyfold-bench}
GROWTH_ROWS=${GROWTH_ROWS-10000000 30000000}
PEERS=${PEERS:-duckdb pandas}
MF_ONLY_ROWS=${MF_ONLY_ROWS-30000000}
if [ $# -gt 0 ]; then ROWS=("$@"); else ROWS=(1000000 10000000); fi
PY=/usr/bin/python3 # Debian's interpreter, where python3-pandas installs
bin=$WORK/bin
mkdir -p "$bin"
log() { echo "run.sh: $*" >&2; }

# What the harness needs: GNU time, Debian's pandas, the tools.
if [ ! -x /usr/bin/time ] || ! "$PY" -c 'import pandas' 2>/dev/null; then
	log "installing time and python3-pandas"
	apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq time python3-pandas >/dev/null
fi
log "building manyfold and the harness tools"
(cd "$root" && go build -o "$bin/manyfold" ./cmd/manyfold)
(cd "$here" && for t in gen sqljob check readall; do go build -o "$bin/$t" ./cmd/$t; done)

results=$WORK/results.tsv
checks=$WORK/checks.txt
: >"$results"
: >"$checks"
{
	echo "date: $(date -u +%FT%TZ)"
	echo "host: $(nproc) cores, $(awk '/MemTotal/ {printf "%.0f GiB", $2/1048576}' /proc/meminfo)"
	echo "load average at start: $(cut -d' ' -f1-3 /proc/loadavg)"
	echo "manyfold: $(cd "$root" && git rev-parse --short HEAD 2>/dev/null || echo unknown)"
	echo "pandas: $("$PY" -c 'import pandas; print(pandas.__version__)')"
} >"$WORK/env.txt"

# measure ROWS IN OUT TOOL THREADS CMD...: runs CMD, appends wall seconds
# and peak RSS (GNU time) to the results.
measure() {
	local rows=$1 in=$2 out=$3 tool=$4 threads=$5
	shift 5
	local tf=$WORK/time.txt
	if ! /usr/bin/time -f '%e %M' -o "$tf" "$@" >"$WORK/last.log" 2>&1; then
		log "FAILED: $*"
		cat "$WORK/last.log" >&2
		exit 1
	fi
	read -r wall kb <"$tf"
	printf '%s\t%s\t%s\t%s\t%s\t%s\t%s\n' "$rows" "$in" "$out" "$tool" "$threads" "$wall" "$kb" >>"$results"
	log "$rows rows $in->$out $tool threads=$threads: ${wall}s $((kb / 1024)) MB"
}

JOB=(--target late --columns dest_postcode,sender_account,shipment_id --methods target:m=20+freq
	--folds 5 --seed 3 --fold-column fold)

mf() { # mf ROWS IN OUTFMT THREADS [LABEL]
	local d=$WORK/$1 out=$WORK/$1/out/mf-$2-$4t.$3
	rm -rf "$d/out/tables"
	measure "$1" "$2" "$3" "${5:-manyfold}" "$4" "$bin/manyfold" encode "$d/shipments.$2" "${JOB[@]}" \
		--out "$out" --tables "$d/out/tables" --threads "$4"
}
duck() { # duck ROWS IN THREADS
	local d=$WORK/$1
	measure "$1" "$2" parquet duckdb "$3" "$bin/sqljob" --in "$d/shipments.$2" --folds "$d/folds.parquet" \
		--out "$d/out/duckdb-$2-$3t.parquet" --threads "$3"
}
pandas() { # pandas ROWS
	local d=$WORK/$1
	measure "$1" csv csv pandas 1 "$PY" "$here/peers/pandas_job.py" "$d/shipments.csv" "$d/out/pandas.csv"
}
has() { [[ " $PEERS " == *" $1 "* ]]; }

for n in "${ROWS[@]}"; do
	d=$WORK/$n
	mkdir -p "$d/out"
	if [ ! -s "$d/folds.parquet" ]; then
		log "generating $n rows"
		"$bin/gen" --rows "$n" --dir "$d"
	fi
	for rep in $(seq "$REPS"); do
		log "$n rows: round $rep of $REPS"
		measure "$n" parquet - "read (floor)" 1 "$bin/readall" "$d/shipments.parquet"
		measure "$n" csv - "read (floor)" 1 "$bin/readall" "$d/shipments.csv"
		mf "$n" parquet parquet 2
		has duckdb && duck "$n" parquet 2
		mf "$n" parquet parquet 1
		has duckdb && duck "$n" parquet 1
		mf "$n" csv parquet 2
		has duckdb && duck "$n" csv 2
		mf "$n" csv csv 2
		has pandas && pandas "$n"
	done
	o=$d/out
	if has duckdb; then
		echo "== $n rows, Parquet->Parquet: manyfold vs DuckDB" >>"$checks"
		"$bin/check" --a "$o/mf-parquet-2t.parquet" --b "$o/duckdb-parquet-2t.parquet" --tol 1e-12 >>"$checks"
		echo "== $n rows, CSV->Parquet: manyfold vs DuckDB" >>"$checks"
		"$bin/check" --a "$o/mf-csv-2t.parquet" --b "$o/duckdb-csv-2t.parquet" --tol 1e-12 >>"$checks"
		echo "== $n rows, Parquet->Parquet: manyfold 1 thread vs 2 threads" >>"$checks"
		"$bin/check" --a "$o/mf-parquet-1t.parquet" --b "$o/mf-parquet-2t.parquet" --tol 0 >>"$checks"
	fi
	if has pandas; then
		echo "== $n rows, CSV->CSV: manyfold vs pandas" >>"$checks"
		"$bin/check" --a "$o/mf-csv-2t.csv" --b "$o/pandas.csv" --tol 1e-9 >>"$checks"
	fi
	rm -f "$o"/*.csv "$o"/*.parquet # keep the disk free for the next size
done

# The growth of manyfold's wall time and memory with the rows, manyfold
# alone: in each round the job at every row count (ROWS, then
# MF_ONLY_ROWS), back to back, and then the job without shipment_id at
# each of GROWTH_ROWS, so that the machine's slower and faster phases fall
# on all sizes alike. (Measured at distant times, the sizes' seconds per
# million rows differed by 20% and more on the same build: this machine's
# speed wanders, and a process that follows one that freed much memory
# pays for its first touches again, about 0.4 s for 250 MB here.)
for n in $MF_ONLY_ROWS; do
	d=$WORK/$n
	mkdir -p "$d/out"
	if [ ! -s "$d/shipments.parquet" ]; then
		log "generating $n rows (Parquet only)"
		"$bin/gen" --rows "$n" --dir "$d" --formats parquet --no-folds-file
	fi
done
# Without shipment_id: the table of each of GROWTH_ROWS (whose accounts
# keep appearing as the rows grow: 38% more from 10M to 30M rows), and,
# for each larger size, the table of the first size written over and over
# to that many rows (gen --repeat): the same levels, more rows.
growth_sizes=($GROWTH_ROWS)
noid_cases=()
for n in $GROWTH_ROWS; do
	noid_cases+=("noid-$n")
	if [ "$n" != "${growth_sizes[0]}" ] && [ $((n % growth_sizes[0])) -eq 0 ]; then
		noid_cases+=("noidrep-$n")
	fi
done
for c in "${noid_cases[@]}"; do
	d=$WORK/$c n=${c#*-}
	mkdir -p "$d/out"
	if [ ! -s "$d/shipments.parquet" ]; then
		log "generating $c"
		rep=1
		[[ $c == noidrep-* ]] && rep=$((n / growth_sizes[0]))
		"$bin/gen" --rows "$n" --repeat "$rep" --dir "$d" --formats parquet --no-shipment-id --no-folds-file
	fi
done
for rep in $(seq "$REPS"); do
	log "growth: round $rep of $REPS"
	for n in "${ROWS[@]}" $MF_ONLY_ROWS; do
		mf "$n" parquet parquet 2 "manyfold, growth"
		rm -f "$WORK/$n"/out/*.parquet
	done
	# Peak RSS without the nearly unique column: the statistics of 40k
	# postcodes and 1M accounts should not grow with the rows.
	for c in "${noid_cases[@]}"; do
		d=$WORK/$c n=${c#*-} label="manyfold, no shipment_id"
		[[ $c == noidrep-* ]] && label="manyfold, no shipment_id, levels of ${growth_sizes[0]} rows"
		rm -rf "$d/out/tables"
		measure "$n" parquet parquet "$label" 2 "$bin/manyfold" encode "$d/shipments.parquet" \
			--target late --columns dest_postcode,sender_account --methods target:m=20+freq \
			--folds 5 --seed 3 --fold-column fold --out "$d/out/mf.parquet" --tables "$d/out/tables" --threads 2
		rm -f "$d/out/mf.parquet"
	done
done

echo "load average at end: $(cut -d' ' -f1-3 /proc/loadavg)" >>"$WORK/env.txt"
cat "$WORK/env.txt"
echo
"$PY" "$here/report.py" "$results"
echo
cat "$checks"
! grep -q DISAGREE "$checks"
