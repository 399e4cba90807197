#!/usr/bin/env bash
# report-check.sh: checks compare's HTML report (--report) in a real browser,
# headless Chromium, on a page 1,280 CSS pixels wide.
#
# What it installs: Debian's chromium package (apt-get update; apt-get install
# chromium), when /usr/bin/chromium is missing. Nothing else: the measuring page
# is written by this script, and no npm package or browser download is used.
#
# What it checks, for every report and every column in it:
#   page     the page does not scroll sideways (the document's scrollWidth
#            within the 1,280 px window) and no element sticks out of the
#            body's text column (a long command line, say);
#   table    the candidates table is no wider than its box (its right edge
#            within the .candidates block); the line also gives the width
#            the table cannot shrink below (its min-content width); the
#            joint model's table (--joint) likewise;
#   overlap  in the bar chart, no two text elements overlap (rotated x-axis
#            labels with their " (winner)" / " (baseline)" notes, the bars'
#            value labels, the tick labels, the axis title and the legend),
#            no text overlaps a bar, a whisker, a fold dot, a legend swatch or
#            an axis line, and every text lies inside the chart; the boxes
#            are the texts' getBBox() mapped through their transforms
#            (getScreenCTM), so a rotated label is a rotated rectangle; the
#            line also gives how far the rotated labels end above the legend;
#   caption  the caption's sentence about the bars' base is true: "Bars start
#            at zero." when the lowest tick is 0, "Bars start at the axis
#            minimum, X" when the lowest tick reads X, that tick sits on the
#            x axis, and every bar's top is where the ticks' scale puts its
#            value (so the bars do start at that minimum).
#
# The report has no scripts: a wrapper page (written next to the reports)
# loads a report in an iframe 1,280 px wide, measures it with a script and
# writes its findings into its own DOM, which `chromium --headless --dump-dom`
# prints.
#
# The cases are generated with the manyfold built from this tree: the demo
# table (manyfold demo --rows 50000), compared on its four columns for the
# binary target late (AUC), with --joint; dest_postcode with long candidate names; the
# regression target cost on the four columns (RMSE); the multiclass target
# parcel_type with --timings (log loss, and the table's extra column); and
# route with 22 candidates of nearly equal AUC (narrow slots: upright value
# labels). About a minute in all, most of it Chromium's starts.
#
# Run, from anywhere in the repository (as root, for the install):
#     bash bench/report-check.sh              # generate the cases and check them
#     bash bench/report-check.sh -k DIR       # keep the reports, the wrapper and
#                                             # a screenshot of each report in DIR
#     bash bench/report-check.sh R.html ...   # check these reports instead
# It prints one line per check and column ("ok ..." or "FAIL ..."), each
# prefixed by the report's name, then "report-check: pass (...)" and exits 0,
# or "report-check: FAIL <the first failure>" and exits 1; it exits 2 when it
# cannot run (no chromium, the build or a compare run failed).
set -euo pipefail

keep=""
if [[ "${1:-}" == "-k" ]]; then
	keep=${2:?"-k needs a directory"}
	shift 2
fi
if [[ "${1:-}" == "-h" || "${1:-}" == "--help" ]]; then
	sed -n '2,/^set -euo/p' "$0" | sed '$d' | sed 's/^# \{0,1\}//'
	exit 0
fi

die() { echo "report-check: $*" >&2; exit 2; }

root=$(cd "$(dirname "$0")/.." && pwd)
if [[ -n "$keep" ]]; then
	mkdir -p "$keep"
	work=$(cd "$keep" && pwd)
else
	work=$(mktemp -d)
	trap 'rm -rf "$work"' EXIT
fi

chrome=${CHROMIUM:-/usr/bin/chromium}
if [[ ! -x "$chrome" ]]; then
	echo "report-check: installing Debian's chromium" >&2
	(apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq chromium) >"$work/apt.log" 2>&1 ||
		die "apt-get install chromium failed (see $work/apt.log)"
fi
[[ -x "$chrome" ]] || die "no chromium at $chrome"

# Reports to check: the arguments, or the generated cases.
reports=()
if (($# > 0)); then
	for r in "$@"; do
		[[ -f "$r" ]] || die "no report $r"
		cp "$r" "$work/$(basename "$r")"
		reports+=("$(basename "$r")")
	done
else
	(cd "$root" && go build -o "$work/manyfold" ./cmd/manyfold) || die "go build ./cmd/manyfold failed"
	mf="$work/manyfold"
	"$mf" demo --rows 50000 --dir "$work/D" >"$work/demo.log" 2>&1 || die "manyfold demo failed (see $work/demo.log)"
	tbl="$work/D/shipments.parquet"
	run() { # name, compare arguments...
		local name=$1
		shift
		"$mf" compare "$tbl" "$@" --report "$work/$name.html" >"$work/$name.txt" 2>&1 ||
			die "manyfold compare $* failed (see $work/$name.txt)"
		reports+=("$name.html")
	}
	run demo --target late --columns dest_postcode,sender_account,route,parcel_type --joint
	run long-names --target late --columns dest_postcode \
		--candidates prior,target:insample,target:blend=20,10:prior=prefix3,target:eb+freq+topk:100,hash:1024:signed:seed=7,onehot:6
	run regression --target cost --columns dest_postcode,sender_account,route,parcel_type
	run multiclass --target parcel_type --columns dest_postcode,route --timings
	run many-candidates --target late --columns route \
		--candidates prior,target:insample,target:eb,target:m=1,target:m=2,target:m=5,target:m=10,target:m=20,target:m=50,target:m=100,freq,topk:5,topk:10,topk:20,topk:50,topk:100,hash:16,hash:64,hash:256,hash:1024,onehot:6,target:eb+freq
fi

cat >"$work/report-check.html" <<'EOF'
<!DOCTYPE html>
<html><head><meta charset="utf-8"><title>report check</title>
<style>body { margin: 0; } iframe { width: 1280px; height: 900px; border: 0; display: block; }</style>
</head><body>
<pre id="out">not run</pre>
<iframe id="frame"></iframe>
<script>
"use strict";
const lines = [];
let failed = 0;
function ok(msg) { lines.push("ok   " + msg); }
function fail(msg) { failed++; lines.push("FAIL " + msg); }
const TOL = 0.5; // px of overlap or overhang forgiven (antialiasing, rounding)

// The four corners of an SVG element's box in the iframe's viewport.
function corners(el) {
  const b = el.getBBox(), m = el.getScreenCTM();
  return [[b.x, b.y], [b.x + b.width, b.y], [b.x + b.width, b.y + b.height], [b.x, b.y + b.height]]
    .map(([x, y]) => [m.a * x + m.c * y + m.e, m.b * x + m.d * y + m.f]);
}
// How deep two convex quadrilaterals overlap (separating axes): <= 0 when apart.
function overlap(p, q) {
  let depth = Infinity;
  for (const poly of [p, q]) {
    for (let i = 0; i < poly.length; i++) {
      const [x0, y0] = poly[i], [x1, y1] = poly[(i + 1) % poly.length];
      let nx = y0 - y1, ny = x1 - x0;
      const len = Math.hypot(nx, ny);
      if (len < 1e-9) continue;
      nx /= len; ny /= len;
      const proj = (ps) => ps.map(([x, y]) => x * nx + y * ny);
      const a = proj(p), b = proj(q);
      depth = Math.min(depth, Math.min(Math.max(...a), Math.max(...b)) - Math.max(Math.min(...a), Math.min(...b)));
    }
  }
  return depth;
}
function describe(el) {
  if (el.tagName === "text") return JSON.stringify(el.textContent);
  const c = el.closest("g.candidate");
  const who = c ? " of " + JSON.stringify(c.querySelector("rect.bar").getAttribute("data-candidate")) : "";
  return el.tagName + (el.getAttribute("class") ? "." + el.getAttribute("class") : "") + who;
}

function checkChart(svg, where) {
  const texts = [...svg.querySelectorAll("text")].filter((t) => t.textContent.trim() !== "" && !t.closest("defs, title"));
  const marks = [...svg.querySelectorAll("rect, circle, line")].filter((m) => !m.closest("defs") && !m.classList.contains("grid"));
  const box = svg.getBoundingClientRect();
  const tc = texts.map(corners), mc = marks.map(corners);
  let bad = 0;
  texts.forEach((t, i) => {
    const xs = tc[i].map((c) => c[0]), ys = tc[i].map((c) => c[1]);
    if (Math.min(...xs) < box.left - TOL || Math.max(...xs) > box.right + TOL ||
        Math.min(...ys) < box.top - TOL || Math.max(...ys) > box.bottom + TOL) {
      bad++;
      fail(where + " bar chart: " + describe(t) + " sticks out of the chart (" +
        [Math.min(...xs) - box.left, box.right - Math.max(...xs), Math.min(...ys) - box.top, box.bottom - Math.max(...ys)]
          .map((v) => v.toFixed(1)).join(" ") + " px from left, right, top, bottom)");
    }
    for (let j = i + 1; j < texts.length; j++) {
      const d = overlap(tc[i], tc[j]);
      if (d > TOL) { bad++; fail(where + " bar chart: " + describe(t) + " overlaps " + describe(texts[j]) + " by " + d.toFixed(1) + " px"); }
    }
    marks.forEach((m, j) => {
      const d = overlap(tc[i], mc[j]);
      if (d > TOL) { bad++; fail(where + " bar chart: " + describe(t) + " overlaps " + describe(m) + " by " + d.toFixed(1) + " px"); }
    });
  });
  // How far the rotated name labels end above the legend (below the x axis).
  const axisY = +[...svg.querySelectorAll("line.axis")].find((l) => l.getAttribute("y1") === l.getAttribute("y2")).getAttribute("y1");
  const legend = [...svg.children].filter((e) => (e.tagName === "rect" || e.tagName === "text") && +e.getAttribute("y") > axisY);
  const rotated = texts.filter((t) => /rotate\(-35/.test(t.getAttribute("transform") || ""));
  const lowest = Math.max(...rotated.map((t) => Math.max(...corners(t).map((c) => c[1]))));
  const legendTop = Math.min(...legend.map((e) => Math.min(...corners(e).map((c) => c[1]))));
  const gap = rotated.length ? ", the rotated labels end " + (legendTop - lowest).toFixed(1) + " px above the legend" : "";
  if (!legend.length) { bad++; fail(where + " bar chart: no legend below the x axis"); }
  if (!bad) ok(where + " bar chart: " + texts.length + " texts (" + rotated.length + " rotated labels) and " + marks.length + " marks, no overlap, all inside " + box.width.toFixed(0) + "x" + box.height.toFixed(0) + " px" + gap);
}

// The caption's sentence about the bars' base against the axis drawn.
function checkCaption(fig, svg, where) {
  const cap = fig.querySelector("figcaption").textContent;
  const x0 = +svg.querySelector("line.axis").getAttribute("x1");
  const axisY = [...svg.querySelectorAll("line.axis")].find((l) => l.getAttribute("y1") === l.getAttribute("y2"));
  const y1 = +axisY.getAttribute("y1");
  const ticks = [...svg.querySelectorAll("line.grid")].map((l) => {
    const t = [...svg.querySelectorAll("text")].find((t) => t.getAttribute("y") === l.getAttribute("y1") && +t.getAttribute("x") === x0);
    return { y: +l.getAttribute("y1"), label: t ? t.textContent : null, v: t ? parseFloat(t.textContent.replace("−", "-")) : NaN };
  }).sort((a, b) => b.y - a.y);
  if (ticks.length < 2 || ticks.some((t) => t.label === null || !isFinite(t.v))) {
    fail(where + " caption: cannot read the value axis ticks"); return;
  }
  const lowest = ticks[0];
  if (Math.abs(lowest.y - y1) > 0.01) { fail(where + " caption: the lowest tick " + lowest.label + " is not on the x axis"); return; }
  const m = cap.match(/Bars start at (zero\.|the axis minimum, ([^,]+),)/);
  if (!m) { fail(where + " caption: no sentence about the bars' base in " + JSON.stringify(cap)); return; }
  if (m[1] === "zero.") {
    if (lowest.v !== 0) { fail(where + " caption: says the bars start at zero, but the axis starts at " + lowest.label); return; }
  } else if (m[2] !== lowest.label || lowest.v === 0) {
    fail(where + " caption: says the bars start at " + m[2] + ", but the axis starts at " + lowest.label); return;
  }
  // Every bar's top where the ticks' linear scale puts its value, its base on the axis.
  const top = ticks[ticks.length - 1];
  const scale = (v) => lowest.y + (v - lowest.v) / (top.v - lowest.v) * (top.y - lowest.y);
  for (const r of svg.querySelectorAll("rect.bar")) {
    const v = parseFloat(r.getAttribute("data-value"));
    const y = +r.getAttribute("y"), h = +r.getAttribute("height");
    if (!isFinite(v) || v < lowest.v || v > top.v) continue;
    if (Math.abs(y + h - y1) > 0.01 || Math.abs(y - scale(v)) > 0.05) {
      fail(where + " caption: bar " + JSON.stringify(r.getAttribute("data-candidate")) + " of value " + v + " spans y " + y.toFixed(2) + " to " + (y + h).toFixed(2) + ", the axis puts it at " + scale(v).toFixed(2) + " to " + y1);
      return;
    }
  }
  ok(where + " caption: " + JSON.stringify(m[0].replace(/,$/, "")) + " and the axis starts at " + lowest.label + "; every bar drawn from it");
}

function checkTable(sec, where) {
  const table = sec.querySelector(".candidates table"), box = table.parentElement;
  const t = table.getBoundingClientRect(), b = box.getBoundingClientRect();
  table.style.width = "min-content"; // the narrowest the table can be, for the margin
  const least = table.getBoundingClientRect().width;
  table.style.width = "";
  if (t.right > b.right + TOL || box.scrollWidth > box.clientWidth) {
    fail(where + " table: " + t.width.toFixed(0) + " px wide in a box of " + b.width.toFixed(0) + " px (" + table.rows[0].cells.length + " columns)");
  } else {
    ok(where + " table: " + t.width.toFixed(0) + " of " + b.width.toFixed(0) + " px, at least " + least.toFixed(0) + " px (" + table.rows[0].cells.length + " columns)");
  }
}

function run() {
  const frame = document.getElementById("frame");
  const doc = frame.contentDocument, win = frame.contentWindow;
  if (!doc || !doc.body) { fail("cannot read the report in the iframe"); return; }
  const de = doc.documentElement;
  if (de.scrollWidth > de.clientWidth) fail("page: " + de.scrollWidth + " px wide in a window of " + de.clientWidth + " px");
  else ok("page: " + de.scrollWidth + " px wide in a window of " + de.clientWidth + " px (iframe " + frame.clientWidth + " px)");
  // Nothing sticks out of the body's text column (a long command line, say).
  const body = doc.body.getBoundingClientRect(), cs = win.getComputedStyle(doc.body);
  const colLeft = body.left + parseFloat(cs.paddingLeft), colRight = body.right - parseFloat(cs.paddingRight);
  let out = 0;
  for (const el of doc.body.querySelectorAll("*")) {
    if (el.ownerSVGElement || el.closest("title")) continue;
    const r = el.getBoundingClientRect();
    if (r.width > 0 && (r.right > colRight + TOL || r.left < colLeft - TOL) && out++ < 3) {
      fail("page: <" + el.tagName.toLowerCase() + "> " + JSON.stringify(el.textContent.slice(0, 40)) + " spans " + r.left.toFixed(0) + " to " + r.right.toFixed(0) + " px, outside the text column " + colLeft.toFixed(0) + " to " + colRight.toFixed(0));
    }
  }
  if (!out) ok("page: every element within the text column, " + colLeft.toFixed(0) + " to " + colRight.toFixed(0) + " px");
  const secs = [...doc.querySelectorAll("section.column")];
  if (!secs.length) fail("no columns in the report");
  for (const sec of secs) {
    const where = JSON.stringify(sec.querySelector("h2").textContent);
    const svg = sec.querySelector("svg.metric-chart");
    checkTable(sec, where);
    if (!svg) { fail(where + ": no bar chart"); continue; }
    checkChart(svg, where);
    checkCaption(svg.closest("figure"), svg, where);
  }
  for (const sec of doc.querySelectorAll("section.joint")) {
    if (sec.querySelector(".candidates table")) checkTable(sec, '"joint"');
  }
}

const name = new URLSearchParams(location.search).get("report");
const frame = document.getElementById("frame");
frame.onload = () => {
  try { run(); } catch (e) { fail("the check threw: " + e); }
  lines.push(failed ? "RESULT fail " + failed : "RESULT pass");
  document.getElementById("out").textContent = lines.join("\n");
};
frame.src = name;
</script>
</body></html>
EOF

chromium_run() { # extra flags and the URL
	"$chrome" --headless --no-sandbox --disable-gpu --disable-quic --no-first-run \
		--disable-background-networking --disable-component-update --disable-sync \
		--user-data-dir="$work/profile" --allow-file-access-from-files --hide-scrollbars=false \
		--virtual-time-budget=10000 "$@" 2>>"$work/chromium.log"
}

status=0
reason=""
for r in "${reports[@]}"; do
	dom=$(chromium_run --window-size=1300,1000 --dump-dom "file://$work/report-check.html?report=$r") ||
		die "chromium failed on $r (see $work/chromium.log)"
	out=$(printf '%s\n' "$dom" | sed -n '/<pre id="out">/,/<\/pre>/p' | sed -e 's/.*<pre id="out">//' -e 's/<\/pre>.*//' |
		sed -e 's/&quot;/"/g' -e 's/&lt;/</g' -e 's/&gt;/>/g' -e 's/&amp;/\&/g')
	[[ -n "$out" ]] || die "no findings from the wrapper page for $r"
	printf '%s\n' "$out" | sed "s|^|$r: |"
	if ! printf '%s\n' "$out" | grep -qx 'RESULT pass'; then
		status=1
		[[ -n "$reason" ]] || reason="$r: $(printf '%s\n' "$out" | grep -m1 '^FAIL ' | sed 's/^FAIL //')"
	fi
	if [[ -n "$keep" ]]; then
		chromium_run --window-size=1280,6000 --screenshot="$work/${r%.html}.png" "file://$work/$r" >/dev/null ||
			echo "report-check: no screenshot of $r" >&2
	fi
done
if ((status)); then
	echo "report-check: FAIL $reason"
	exit 1
fi
echo "report-check: pass (${#reports[@]} reports at 1280 px)"
