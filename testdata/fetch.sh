#!/usr/bin/env bash
# fetch.sh downloads the open data sets that manyfold's tests read into
# testdata/open/ (ignored by git). It is idempotent: files already present
# are left alone. Needs npm, node, tar and sha1sum.
#
# The files come from the npm package vega-datasets@3.2.1. Each is checked
# against the "hash" and "bytes" fields that the package's datapackage.json
# lists for it. That hash is "sha1:<hex>" where <hex> is the SHA-1 of the
# git blob object ("blob <size>\0" followed by the file's bytes), not of the
# bare file; the script computes that form. See testdata/README.md for the
# provenance and licences.
set -euo pipefail

here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
out="$here/open"
pkg="vega-datasets@3.2.1"
files=(flights-3m.parquet zipcodes.csv)

missing=()
for f in "${files[@]}"; do
	[[ -s "$out/$f" ]] || missing+=("$f")
done
if [[ ${#missing[@]} -eq 0 ]]; then
	echo "fetch.sh: testdata/open is complete"
	exit 0
fi

for tool in npm node tar sha1sum; do
	command -v "$tool" >/dev/null || { echo "fetch.sh: $tool is required" >&2; exit 1; }
done

tmp="$(mktemp -d)"
trap 'rm -rf "$tmp"' EXIT
(cd "$tmp" && npm pack --silent "$pkg" >/dev/null)
tgz=("$tmp"/vega-datasets-*.tgz)
[[ -f "${tgz[0]}" ]] || { echo "fetch.sh: npm pack $pkg produced no tarball" >&2; exit 1; }
tar -xzf "${tgz[0]}" -C "$tmp"
meta="$tmp/package/datapackage.json"
[[ -f "$meta" ]] || { echo "fetch.sh: $pkg has no datapackage.json" >&2; exit 1; }

# blobsha1 prints the git blob SHA-1 of a file.
blobsha1() {
	local size
	size=$(wc -c <"$1" | tr -d ' ')
	{ printf 'blob %s\0' "$size"; cat "$1"; } | sha1sum | cut -d' ' -f1
}

mkdir -p "$out"
for f in "${missing[@]}"; do
	src="$tmp/package/data/$f"
	[[ -f "$src" ]] || { echo "fetch.sh: $pkg does not contain data/$f" >&2; exit 1; }
	# Prints "<hash> <bytes>" for the resource whose path is $f.
	read -r want wantbytes < <(node -e '
		const m = require(process.argv[1]);
		const r = (m.resources || []).find(r => r.path === process.argv[2]);
		if (!r || !r.hash) { process.exit(3); }
		console.log(r.hash + " " + (r.bytes === undefined ? "-" : r.bytes));
	' "$meta" "$f") || { echo "fetch.sh: datapackage.json lists no hash for $f" >&2; exit 1; }
	case "$want" in
	sha1:*) want="${want#sha1:}" ;;
	*) echo "fetch.sh: unexpected hash form for $f: $want" >&2; exit 1 ;;
	esac
	got="$(blobsha1 "$src")"
	if [[ "$got" != "$want" ]]; then
		echo "fetch.sh: SHA-1 MISMATCH for $f: datapackage.json lists $want, file gives $got" >&2
		exit 1
	fi
	gotbytes=$(wc -c <"$src" | tr -d ' ')
	if [[ "$wantbytes" != "-" && "$gotbytes" != "$wantbytes" ]]; then
		echo "fetch.sh: SIZE MISMATCH for $f: datapackage.json lists $wantbytes bytes, file has $gotbytes" >&2
		exit 1
	fi
	cp "$src" "$out/$f.tmp"
	mv "$out/$f.tmp" "$out/$f"
	echo "fetch.sh: $f ok (sha1 $got, $gotbytes bytes)"
done
