package compare

import (
	"bytes"
	"encoding/xml"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"
)

// node is an element of the parsed report.
type node struct {
	name     string
	attrs    map[string]string
	children []*node
	text     strings.Builder // character data directly inside the element
}

func (n *node) class() string { return n.attrs["class"] }

// all returns every descendant element (n included) for which keep is true.
func (n *node) all(keep func(*node) bool) []*node {
	var out []*node
	var walk func(*node)
	walk = func(m *node) {
		if keep(m) {
			out = append(out, m)
		}
		for _, c := range m.children {
			walk(c)
		}
	}
	walk(n)
	return out
}

// allText returns the character data of n and its descendants.
func (n *node) allText() string {
	var sb strings.Builder
	var walk func(*node)
	walk = func(m *node) {
		sb.WriteString(m.text.String())
		for _, c := range m.children {
			walk(c)
		}
	}
	walk(n)
	return sb.String()
}

func elem(name, class string) func(*node) bool {
	return func(n *node) bool {
		return n.name == name && (class == "" || n.class() == class)
	}
}

// parseXML parses data strictly as XML (so the report must be XHTML-compatible
// markup) and returns the root element.
func parseXML(t *testing.T, data []byte) *node {
	t.Helper()
	d := xml.NewDecoder(bytes.NewReader(data))
	d.Strict = true
	d.AutoClose = nil
	d.Entity = xml.HTMLEntity
	root := &node{name: "#document", attrs: map[string]string{}}
	stack := []*node{root}
	sawDoctype := false
	for {
		tok, err := d.Token()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatalf("report is not well-formed XML: %v", err)
		}
		switch tk := tok.(type) {
		case xml.StartElement:
			if tk.Name.Local != strings.ToLower(tk.Name.Local) {
				t.Errorf("tag %q is not lower case", tk.Name.Local)
			}
			n := &node{name: tk.Name.Local, attrs: map[string]string{}}
			for _, a := range tk.Attr {
				key := a.Name.Local
				if a.Name.Space != "" {
					key = a.Name.Space + ":" + key
				}
				n.attrs[key] = a.Value
			}
			top := stack[len(stack)-1]
			top.children = append(top.children, n)
			stack = append(stack, n)
		case xml.EndElement:
			stack = stack[:len(stack)-1]
		case xml.CharData:
			stack[len(stack)-1].text.Write(tk)
		case xml.Directive:
			if strings.EqualFold(strings.TrimSpace(string(tk)), "DOCTYPE html") {
				sawDoctype = true
			}
		}
	}
	if !sawDoctype {
		t.Error("no <!DOCTYPE html>")
	}
	if len(root.children) != 1 || root.children[0].name != "html" {
		t.Fatalf("document root is not a single <html> element")
	}
	return root.children[0]
}

// Names with markup characters, to check that user text is escaped.
const (
	trickyColumn    = `route <N&S> "express"`
	trickyCandidate = `hash:<64>&"b"`
	trickyFile      = `shipments <2024> & "late".csv`
)

func cand(name string, mean, std float64, baseline, winner bool, metrics ...Metric) CandidateResult {
	return CandidateResult{
		Name: name, Baseline: baseline, Winner: winner,
		Primary:       Stat{Mean: mean, Std: std},
		PerFold:       []float64{mean - std, mean, mean + std/2},
		Metrics:       metrics,
		TrainPrimary:  Stat{Mean: mean * 1.01, Std: std / 2},
		FitSeconds:    0.123 + mean,
		OutputColumns: 1,
		UnseenShare:   0.0125,
	}
}

func rankCurve(levels int) []RankPoint {
	var pts []RankPoint
	for r := 1; r <= levels; r *= 10 {
		pts = append(pts, RankPoint{Rank: r, Rows: uint64(1_000_000 / r)})
	}
	pts = append(pts, RankPoint{Rank: levels, Rows: 1})
	return pts
}

func binaryResult() *Result {
	auc := func(m float64) Metric { return Metric{Name: "auc", Stat: Stat{m, 0.01}} }
	ll := func(m float64) Metric { return Metric{Name: "logloss", Stat: Stat{m, 0.002}} }
	return &Result{
		File: trickyFile, Target: "late_delivery", Task: "binary",
		Metric: "auc", HigherBetter: true, Folds: 5, InnerFolds: 3, FoldBy: "group=sender_account", Seed: 42,
		Rows: 1_234_567, ModelRows: 200_000, With: []string{"parcel_weight", "distance_km"},
		Columns: []ColumnResult{
			{
				Column: "sender_account", Levels: 50_000,
				Candidates: []CandidateResult{
					cand("target:eb", 0.781, 0.004, false, true, auc(0.781), ll(0.41)),
					cand("target:insample", 0.752, 0.006, true, false, auc(0.752), ll(0.45)),
					cand("frequency", 0.703, 0.003, false, false, auc(0.703), ll(0.48)),
					cand("topk:100", 0.655, 0.005, false, false, auc(0.655), ll(0.50)),
					cand("prior", 0.5, 0, true, false, auc(0.5), ll(0.55)),
				},
				Reading:  "target:eb beats the prior by 0.281 AUC; the in-sample target mean flatters itself.",
				RankFreq: rankCurve(50_000),
				Shrinkage: []ShrinkPoint{
					{Rows: 4000, Raw: 0.30, Smoothed: 0.299},
					{Rows: 40, Raw: 0.60, Smoothed: 0.41},
					{Rows: 2, Raw: 1.0, Smoothed: 0.27},
					{Rows: 400, Raw: 0.05, Smoothed: 0.09},
				},
			},
			{
				Column: trickyColumn, Levels: 1200,
				Candidates: []CandidateResult{
					cand("topk:100", 0.640, 0.010, false, true, auc(0.640), ll(0.50)),
					cand(trickyCandidate, 0.622, 0.012, false, false, auc(0.622), ll(0.51)),
					cand("target:insample", 0.611, 0.008, true, false, auc(0.611), ll(0.52)),
					cand("frequency", 0.587, 0.009, false, false, auc(0.587), ll(0.53)),
					cand("prior", 0.5, 0, true, false, auc(0.5), ll(0.55)),
				},
				Reading:  `Weak signal in "` + trickyColumn + `"; topk:100 is best.`,
				RankFreq: rankCurve(1200),
				// No Shrinkage: the report must say so instead of drawing.
			},
		},
	}
}

func regressionResult() *Result {
	rmse := func(m float64) Metric { return Metric{Name: "rmse", Stat: Stat{m, 0.1}} }
	return &Result{
		File: "costs.parquet", Target: "delivery_cost", Task: "regression",
		Metric: "rmse", HigherBetter: false, Folds: 4, InnerFolds: 2, Seed: 7,
		Rows: 90_000, ModelRows: 90_000,
		Columns: []ColumnResult{
			{
				Column: "postcode", Levels: 9000,
				Candidates: []CandidateResult{ // best first: rising RMSE
					cand("target:eb", 3.10, 0.05, false, true, rmse(3.10)),
					cand("target:insample", 3.35, 0.07, true, false, rmse(3.35)),
					cand("hash:1024", 3.52, 0.06, false, false, rmse(3.52)),
					cand("frequency", 3.90, 0.04, false, false, rmse(3.90)),
					cand("prior", 4.40, 0.02, true, false, rmse(4.40)),
				},
				Reading:  "target:eb lowers RMSE by 1.30 against the prior.",
				RankFreq: rankCurve(9000),
				Shrinkage: []ShrinkPoint{
					{Rows: 900, Raw: 12.5, Smoothed: 12.4},
					{Rows: 3, Raw: 30.0, Smoothed: 15.2},
					{Rows: 30, Raw: 5.0, Smoothed: 9.8},
				},
			},
			{
				Column: "parcel_type", Levels: 12,
				Candidates: []CandidateResult{
					cand("topk:12", 4.01, 0.03, false, true, rmse(4.01)),
					cand("target:eb", 4.02, 0.03, false, false, rmse(4.02)),
					cand("target:insample", 4.05, 0.03, true, false, rmse(4.05)),
					cand("frequency", 4.30, 0.03, false, false, rmse(4.30)),
					cand("prior", 4.40, 0.02, true, false, rmse(4.40)),
				},
				Reading: "Twelve parcel types: every encoding is close.",
				RankFreq: []RankPoint{
					{1, 30000}, {2, 20000}, {3, 15000}, {6, 8000}, {12, 500},
				},
				Shrinkage: []ShrinkPoint{{Rows: 30000, Raw: 4.1, Smoothed: 4.1}, {Rows: 500, Raw: 9.0, Smoothed: 8.7}},
			},
		},
	}
}

func TestReportStructure(t *testing.T) {
	tests := []struct {
		name string
		r    *Result
	}{
		{"binary auc", binaryResult()},
		{"regression rmse", regressionResult()},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			path := filepath.Join(t.TempDir(), "report.html")
			if err := WriteReport(path, tc.r); err != nil {
				t.Fatal(err)
			}
			data, err := os.ReadFile(path)
			if err != nil {
				t.Fatal(err)
			}
			checkSelfContained(t, data)
			html := parseXML(t, data)
			if s := html.all(elem("script", "")); len(s) != 0 {
				t.Errorf("%d <script> elements", len(s))
			}
			for _, tag := range []string{"link", "img", "iframe", "object", "embed"} {
				if s := html.all(elem(tag, "")); len(s) != 0 {
					t.Errorf("%d <%s> elements in a self-contained report", len(s), tag)
				}
			}
			if n := len(html.all(elem("style", ""))); n != 1 {
				t.Errorf("%d <style> elements, want 1 inline stylesheet", n)
			}
			if !strings.Contains(html.allText(), "@media print") {
				t.Error("no print stylesheet")
			}

			charts := html.all(elem("svg", "metric-chart"))
			if len(charts) != len(tc.r.Columns) {
				t.Fatalf("%d metric charts, want %d", len(charts), len(tc.r.Columns))
			}
			sections := html.all(elem("section", "column"))
			if len(sections) != len(tc.r.Columns) {
				t.Fatalf("%d column sections, want %d", len(sections), len(tc.r.Columns))
			}
			for i, col := range tc.r.Columns {
				var mine []*node
				for _, c := range charts {
					if c.attrs["data-column"] == col.Column {
						mine = append(mine, c)
					}
				}
				if len(mine) != 1 {
					t.Errorf("column %q: %d metric charts, want exactly 1", col.Column, len(mine))
					continue
				}
				checkBars(t, col, mine[0])
				sec := sections[i]
				if h := sec.all(elem("h2", "")); len(h) != 1 || h[0].allText() != col.Column {
					t.Errorf("section %d heading does not round-trip %q", i, col.Column)
				}
				if got := sec.all(elem("svg", "metric-chart")); len(got) != 1 || got[0] != mine[0] {
					t.Errorf("section %d does not hold the chart of column %q", i, col.Column)
				}
				checkRankFreq(t, col, sec)
				checkShrinkage(t, col, sec)
				checkTable(t, col, sec)
			}
		})
	}
}

// checkSelfContained looks at the raw bytes: nothing may be fetched from a
// network, and user text must never appear unescaped.
func checkSelfContained(t *testing.T, data []byte) {
	t.Helper()
	lower := strings.ToLower(string(data))
	for _, bad := range []string{"http://", "https://", "@import", "<script", "@font-face", "//cdn"} {
		if strings.Contains(lower, bad) {
			t.Errorf("report contains %q", bad)
		}
	}
	// Every url(...) must be a fragment inside the document (the hatch
	// pattern), never a file or address.
	for s := lower; ; {
		i := strings.Index(s, "url(")
		if i < 0 {
			break
		}
		if !strings.HasPrefix(s[i+4:], "#") {
			t.Errorf("external url(...) reference: %.40s", s[i:])
		}
		s = s[i+4:]
	}
	for _, raw := range []string{trickyColumn, trickyCandidate, trickyFile, "<N&S>", "<64>"} {
		if bytes.Contains(data, []byte(raw)) {
			t.Errorf("unescaped user text %q in the report", raw)
		}
	}
}

func checkBars(t *testing.T, col ColumnResult, chart *node) {
	t.Helper()
	bars := chart.all(elem("rect", "bar"))
	if len(bars) != len(col.Candidates) {
		t.Fatalf("column %q: %d bars, want %d", col.Column, len(bars), len(col.Candidates))
	}
	byName := map[string]*node{}
	for _, b := range bars {
		byName[b.attrs["data-candidate"]] = b
	}
	heights := make([]float64, len(col.Candidates))
	for i, c := range col.Candidates {
		b, ok := byName[c.Name]
		if !ok {
			t.Errorf("column %q: no bar for candidate %q", col.Column, c.Name)
			continue
		}
		if b != bars[i] {
			t.Errorf("column %q: bar %d is not candidate %q (bars must keep the candidates' order)", col.Column, i, c.Name)
		}
		v, err := strconv.ParseFloat(b.attrs["data-value"], 64)
		if err != nil || v != c.Primary.Mean {
			t.Errorf("column %q, %q: data-value %q, want %v", col.Column, c.Name, b.attrs["data-value"], c.Primary.Mean)
		}
		h, err := strconv.ParseFloat(b.attrs["height"], 64)
		if err != nil || h < 0 {
			t.Errorf("column %q, %q: bad height %q", col.Column, c.Name, b.attrs["height"])
		}
		heights[i] = h
		wantKind := "candidate"
		if c.Baseline {
			wantKind = "baseline"
		} else if c.Winner {
			wantKind = "winner"
		}
		if k := b.attrs["data-kind"]; k != wantKind {
			t.Errorf("column %q, %q: data-kind %q, want %q", col.Column, c.Name, k, wantKind)
		}
	}
	// Heights are proportional to mean minus the axis minimum, so for every
	// pair of candidates the heights compare like the means, strictly.
	for i := range col.Candidates {
		for j := i + 1; j < len(col.Candidates); j++ {
			mi, mj := col.Candidates[i].Primary.Mean, col.Candidates[j].Primary.Mean
			hi, hj := heights[i], heights[j]
			if (mi > mj) != (hi > hj) || (mi < mj) != (hi < hj) {
				t.Errorf("column %q: means %v, %v but heights %v, %v", col.Column, mi, mj, hi, hj)
			}
		}
	}
	// And proportional: (h_i - h_j) / (m_i - m_j) is one scale for all pairs.
	scale := (heights[0] - heights[len(heights)-1]) / (col.Candidates[0].Primary.Mean - col.Candidates[len(heights)-1].Primary.Mean)
	for i := 1; i < len(heights)-1; i++ {
		s := (heights[0] - heights[i]) / (col.Candidates[0].Primary.Mean - col.Candidates[i].Primary.Mean)
		if math.Abs(s-scale) > 0.01*math.Abs(scale) {
			t.Errorf("column %q: bar %d scale %v px per unit, bar %d %v", col.Column, i, s, len(heights)-1, scale)
		}
	}
	// Every baseline is labelled as one where its bar stands.
	text := chart.allText()
	if strings.Count(text, "baseline") < 2 {
		t.Errorf("column %q: baselines not labelled in the chart", col.Column)
	}
}

func points(t *testing.T, s string) [][2]float64 {
	t.Helper()
	var out [][2]float64
	for _, f := range strings.Fields(s) {
		xs, ys, ok := strings.Cut(f, ",")
		x, err1 := strconv.ParseFloat(xs, 64)
		y, err2 := strconv.ParseFloat(ys, 64)
		if !ok || err1 != nil || err2 != nil {
			t.Fatalf("bad polyline point %q", f)
		}
		out = append(out, [2]float64{x, y})
	}
	return out
}

func checkRankFreq(t *testing.T, col ColumnResult, sec *node) {
	t.Helper()
	svgs := sec.all(elem("svg", "rank-frequency"))
	if len(svgs) != 1 {
		t.Fatalf("column %q: %d rank-frequency charts, want 1", col.Column, len(svgs))
	}
	lines := svgs[0].all(elem("polyline", ""))
	if len(lines) != 1 {
		t.Fatalf("column %q: %d polylines", col.Column, len(lines))
	}
	pts := points(t, lines[0].attrs["points"])
	if len(pts) != len(col.RankFreq) {
		t.Fatalf("column %q: %d points, want %d", col.Column, len(pts), len(col.RankFreq))
	}
	// Log-log axes: screen x is linear in log10(rank), screen y in
	// log10(rows) (downwards), with one scale per axis.
	rf := col.RankFreq
	last := len(rf) - 1
	sx := (pts[last][0] - pts[0][0]) / math.Log10(float64(rf[last].Rank)/float64(rf[0].Rank))
	sy := (pts[last][1] - pts[0][1]) / math.Log10(float64(rf[last].Rows)/float64(rf[0].Rows))
	if !(sx > 0) || !(sy < 0) {
		t.Fatalf("column %q: axis scales x %v y %v, want x>0, y<0", col.Column, sx, sy)
	}
	for i := 1; i < last; i++ {
		gx := (pts[i][0] - pts[0][0]) / math.Log10(float64(rf[i].Rank)/float64(rf[0].Rank))
		gy := (pts[i][1] - pts[0][1]) / math.Log10(float64(rf[i].Rows)/float64(rf[0].Rows))
		if math.Abs(gx-sx) > 0.01*sx || math.Abs(gy-sy) > 0.01*-sy {
			t.Errorf("column %q: point %d not on log-log axes (scales %v,%v vs %v,%v)", col.Column, i, gx, gy, sx, sy)
		}
	}
	// Decade ticks: labels 1 and 10 on the rank axis at least.
	text := svgs[0].allText()
	for _, lab := range []string{"1", "10"} {
		found := false
		for _, tx := range svgs[0].all(elem("text", "")) {
			if tx.allText() == lab {
				found = true
			}
		}
		if !found {
			t.Errorf("column %q: no decade tick %q in %q", col.Column, lab, text)
		}
	}
}

func checkShrinkage(t *testing.T, col ColumnResult, sec *node) {
	t.Helper()
	svgs := sec.all(elem("svg", "shrinkage"))
	if len(col.Shrinkage) == 0 {
		if len(svgs) != 0 {
			t.Errorf("column %q: shrinkage chart drawn without points", col.Column)
		}
		if !strings.Contains(sec.allText(), "No shrinkage plot") {
			t.Errorf("column %q: no note for the missing shrinkage plot", col.Column)
		}
		return
	}
	if len(svgs) != 1 {
		t.Fatalf("column %q: %d shrinkage charts, want 1", col.Column, len(svgs))
	}
	circles := svgs[0].all(elem("circle", "level"))
	if len(circles) != len(col.Shrinkage) {
		t.Fatalf("column %q: %d circles, want %d", col.Column, len(circles), len(col.Shrinkage))
	}
	if d := svgs[0].all(elem("line", "diag")); len(d) != 1 {
		t.Errorf("column %q: %d diagonals, want 1", col.Column, len(d))
	}
	// The largest level has the largest circle; every radius is bounded.
	var maxRows uint64
	for _, p := range col.Shrinkage {
		maxRows = max(maxRows, p.Rows)
	}
	var rmax float64
	for _, c := range circles {
		r, err := strconv.ParseFloat(c.attrs["r"], 64)
		if err != nil || r <= 0 || r > 10 {
			t.Errorf("column %q: circle radius %q out of (0, 10]", col.Column, c.attrs["r"])
		}
		rmax = math.Max(rmax, r)
	}
	// Circles are drawn largest level first.
	if r0, _ := strconv.ParseFloat(circles[0].attrs["r"], 64); r0 != rmax {
		t.Errorf("column %q: first circle r=%v, want the largest %v", col.Column, r0, rmax)
	}
	// A level with raw == smoothed lies on the diagonal; find the diagonal's
	// ends and check collinearity for such points.
	d := svgs[0].all(elem("line", "diag"))[0]
	x1, _ := strconv.ParseFloat(d.attrs["x1"], 64)
	y1, _ := strconv.ParseFloat(d.attrs["y1"], 64)
	x2, _ := strconv.ParseFloat(d.attrs["x2"], 64)
	y2, _ := strconv.ParseFloat(d.attrs["y2"], 64)
	for _, p := range col.Shrinkage {
		if p.Raw != p.Smoothed {
			continue
		}
		found := false
		for _, c := range circles {
			cx, _ := strconv.ParseFloat(c.attrs["cx"], 64)
			cy, _ := strconv.ParseFloat(c.attrs["cy"], 64)
			cross := (x2-x1)*(cy-y1) - (y2-y1)*(cx-x1)
			if math.Abs(cross) < 1e-3*math.Hypot(x2-x1, y2-y1) {
				found = true
			}
		}
		if !found {
			t.Errorf("column %q: level with raw = smoothed = %v is off the diagonal", col.Column, p.Raw)
		}
	}
}

func checkTable(t *testing.T, col ColumnResult, sec *node) {
	t.Helper()
	tables := sec.all(elem("table", ""))
	if len(tables) != 1 {
		t.Fatalf("column %q: %d tables", col.Column, len(tables))
	}
	rows := tables[0].all(func(n *node) bool { return n.name == "tr" && n.class() != "" })
	if len(rows) != len(col.Candidates) {
		t.Fatalf("column %q: %d table rows, want %d", col.Column, len(rows), len(col.Candidates))
	}
	for i, c := range col.Candidates {
		cells := rows[i].all(elem("td", ""))
		if len(cells) == 0 || !strings.HasPrefix(cells[0].allText(), c.Name) {
			t.Errorf("column %q: row %d does not start with %q", col.Column, i, c.Name)
			continue
		}
		want := meanStd(c.Metrics[0].Mean, c.Metrics[0].Std)
		if got := cells[1].allText(); got != want {
			t.Errorf("column %q, %q: first metric cell %q, want %q", col.Column, c.Name, got, want)
		}
		if got, want := cells[len(cells)-3].allText(), strconv.FormatFloat(c.FitSeconds, 'f', 2, 64); got != want {
			t.Errorf("column %q, %q: fit seconds %q, want %q", col.Column, c.Name, got, want)
		}
	}
	if !strings.Contains(sec.allText(), col.Reading) {
		t.Errorf("column %q: reading %q missing or not round-tripped", col.Column, col.Reading)
	}
}

func TestReportHeaderRoundTrip(t *testing.T) {
	r := binaryResult()
	path := filepath.Join(t.TempDir(), "report.html")
	if err := WriteReport(path, r); err != nil {
		t.Fatal(err)
	}
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	html := parseXML(t, data)
	header := map[string]string{}
	for _, dl := range html.all(elem("dl", "meta")) {
		var key string
		for _, c := range dl.children {
			switch c.name {
			case "dt":
				key = c.allText()
			case "dd":
				header[key] = c.allText()
			}
		}
	}
	tests := []struct{ key, want string }{
		{"File", trickyFile},
		{"Target", "late_delivery"},
		{"Task", "binary"},
		{"Primary metric", "AUC (higher is better)"}, // the metric's name as the text table spells it
		{"Test", testName},
		{"Folds", "5 outer × 3 inner"},
		{"Fold rule", "group=sender_account"},
		{"Seed", "42"},
		{"Rows", "1 234 567"},
		{"Model rows", "200 000"},
		{"Numeric columns added", "parcel_weight, distance_km"},
	}
	for _, tc := range tests {
		if got := header[tc.key]; got != tc.want {
			t.Errorf("header %q = %q, want %q", tc.key, got, tc.want)
		}
	}
}

func TestReportFailedWrite(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "missing", "report.html")
	if err := WriteReport(path, binaryResult()); err == nil {
		t.Fatal("no error writing into a missing directory")
	}
	entries, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	if len(entries) != 0 {
		t.Errorf("failed write left %d entries, e.g. %q", len(entries), entries[0].Name())
	}
	if err := WriteReport(filepath.Join(dir, "r.html"), nil); err == nil {
		t.Error("no error for a nil result")
	}
	if entries, _ := os.ReadDir(dir); len(entries) != 0 {
		t.Errorf("nil result left %d entries", len(entries))
	}
}

func TestReportBarAxis(t *testing.T) {
	mk := func(means ...float64) []CandidateResult {
		var cs []CandidateResult
		for _, m := range means {
			cs = append(cs, CandidateResult{Primary: Stat{Mean: m, Std: 0.01}})
		}
		return cs
	}
	tests := []struct {
		name   string
		metric string
		cands  []CandidateResult
		lo     float64 // expected axis minimum
	}{
		// AUC: largest tick strictly below min(0.5, smallest mean); the
		// step is 0.1 for a span of 0.29 (0.29/5 rounded up to 1, 2, 2.5
		// or 5 times a power of ten), computed from the rule by hand.
		{"auc with chance bar", "auc", mk(0.78, 0.70, 0.5), 0.4},
		{"auc all above chance", "auc", mk(0.78, 0.70, 0.62), 0.4},
		{"auc narrow", "auc", mk(0.52, 0.51, 0.505), 0.49},
		{"auc below chance", "mean_ovr_auc", mk(0.6, 0.42), 0.4},
		// Losses and errors start at 0.
		{"logloss", "logloss", mk(0.41, 0.55), 0},
		{"rmse", "rmse", mk(3.1, 4.4), 0},
		// A negative R² extends the axis below zero, to a tick.
		{"r2 negative", "r2", mk(0.3, -0.12), -0.2},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			lo, hi, step := barAxis(tc.metric, tc.cands)
			if math.Abs(lo-tc.lo) > 1e-9 {
				t.Errorf("axis minimum %v, want %v (step %v)", lo, tc.lo, step)
			}
			for _, c := range tc.cands {
				if c.Primary.Mean < lo || c.Primary.Mean+c.Primary.Std > hi+1e-12 {
					t.Errorf("mean %v ± %v outside axis [%v, %v]", c.Primary.Mean, c.Primary.Std, lo, hi)
				}
			}
			if k := (hi - lo) / step; math.Abs(k-math.Round(k)) > 1e-6 || k < 2 || k > 12 {
				t.Errorf("axis [%v, %v] is %v steps of %v", lo, hi, k, step)
			}
		})
	}
}

func TestReportFormatting(t *testing.T) {
	tests := []struct {
		v    float64
		want string
	}{
		{0.78123, "0.7812"},
		{0.5, "0.5000"},
		{3.14159, "3.142"},
		{9.99996, "10.00"},
		{1234.56, "1235"},
		{12345.6, "12350"},
		{0.000123456, "0.0001235"},
		{1.5e-7, "1.5e-07"},
		{-0.0412345, "-0.04123"},
		{0, "0"},
		{math.NaN(), "n/a"},
	}
	for _, tc := range tests {
		if got := sig4(tc.v); got != tc.want {
			t.Errorf("sig4(%v) = %q, want %q", tc.v, got, tc.want)
		}
	}
	for _, tc := range []struct {
		mean, std float64
		want      string
	}{
		{0.781, 0.01, "0.7810 ± 0.0100"},
		{3.1, 0.05, "3.100 ± 0.050"},
		{0.5, 0, "0.5000 ± 0.0000"},
		{0.7123, 0.00001234, "0.7123 ± 1.2e-05"},
		{1234.6, 12.3, "1235 ± 12"},
		{math.NaN(), 0.1, "n/a ± 0.1000"},
	} {
		if got := meanStd(tc.mean, tc.std); got != tc.want {
			t.Errorf("meanStd(%v, %v) = %q, want %q", tc.mean, tc.std, got, tc.want)
		}
	}
	for _, tc := range []struct {
		n    int64
		want string
	}{{0, "0"}, {999, "999"}, {1000, "1 000"}, {1234567, "1 234 567"}} {
		if got := groupDigits(tc.n); got != tc.want {
			t.Errorf("groupDigits(%d) = %q, want %q", tc.n, got, tc.want)
		}
	}
	if got := clean("a\x00b\x1fc\xffd\te"); got != "a\uFFFDb\uFFFDc\uFFFDd\te" {
		t.Errorf("clean = %q", got)
	}
}

// manyCandidates returns a binary result whose one column has n candidates
// of nearly equal AUC, so their value labels stand side by side at one
// height, as with 20 settings of one method.
func manyCandidates(n int) *Result {
	r := binaryResult()
	col := &r.Columns[0]
	col.Candidates = nil
	for i := range n {
		m := 0.6054 - 0.0002*float64(i)
		col.Candidates = append(col.Candidates, cand("target:m="+strconv.Itoa(i+1), m, 0.003, false, i == 0))
	}
	col.Candidates = append(col.Candidates, cand("prior", 0.5, 0, true, false))
	r.Columns = r.Columns[:1]
	return r
}

// valueBox is the box a bar's value label covers in the chart's units,
// from its anchor, its text-anchor and its rotation, with every character
// as wide as a figure of the widest common sans (0.64 em; headless
// Chromium's DejaVu Sans measured in bench/report-check.sh) and the glyphs
// 0.93 em above and 0.24 em below the baseline.
func valueBox(t *testing.T, n *node) (x0, y0, x1, y1 float64) {
	t.Helper()
	const size = 10.5
	x, _ := strconv.ParseFloat(n.attrs["x"], 64)
	y, _ := strconv.ParseFloat(n.attrs["y"], 64)
	w := float64(len([]rune(n.allText()))) * 0.64 * size
	up, down := 0.93*size, 0.24*size
	switch tr := n.attrs["transform"]; {
	case tr == "" && n.attrs["text-anchor"] == "middle":
		return x - w/2, y - up, x + w/2, y + down
	case tr == fmt.Sprintf("rotate(-90 %s %s)", n.attrs["x"], n.attrs["y"]) && n.attrs["text-anchor"] == "start":
		// Reading upwards: the text runs from the anchor up, its glyphs
		// left of the baseline.
		return x - up, y - w, x + down, y
	default:
		t.Fatalf("value label %q: anchor %q, transform %q", n.allText(), n.attrs["text-anchor"], n.attrs["transform"])
	}
	return
}

// TestReportValueLabelsApart checks the rule that sets the bars' value
// labels upright when they do not fit side by side (valueLabels): with 24
// candidates of nearly equal scores no two labels overlap and every label
// lies inside the chart, and with 5 the labels stay level.
func TestReportValueLabelsApart(t *testing.T) {
	for _, n := range []int{4, 23, 40} {
		t.Run(strconv.Itoa(n+1)+" candidates", func(t *testing.T) {
			var buf bytes.Buffer
			if err := WriteReportTo(&buf, manyCandidates(n)); err != nil {
				t.Fatal(err)
			}
			html := parseXML(t, buf.Bytes())
			svg := html.all(elem("svg", "metric-chart"))[0]
			vb := strings.Fields(svg.attrs["viewBox"])
			w, _ := strconv.ParseFloat(vb[2], 64)
			h, _ := strconv.ParseFloat(vb[3], 64)
			labels := svg.all(elem("text", "value"))
			if len(labels) != n+1 {
				t.Fatalf("%d value labels, want %d", len(labels), n+1)
			}
			upright := 0
			type box struct{ x0, y0, x1, y1 float64 }
			var boxes []box
			for _, l := range labels {
				if l.attrs["transform"] != "" {
					upright++
				}
				x0, y0, x1, y1 := valueBox(t, l)
				if x0 < 0 || y0 < 0 || x1 > w || y1 > h {
					t.Errorf("value label %q at (%.1f %.1f)-(%.1f %.1f) leaves the %gx%g chart", l.allText(), x0, y0, x1, y1, w, h)
				}
				boxes = append(boxes, box{x0, y0, x1, y1})
			}
			for i := 1; i < len(boxes); i++ {
				a, b := boxes[i-1], boxes[i]
				if a.x1 > b.x0 && b.x1 > a.x0 && a.y1 > b.y0 && b.y1 > a.y0 {
					t.Errorf("value labels %q and %q overlap: x %.1f-%.1f and %.1f-%.1f", labels[i-1].allText(), labels[i].allText(), a.x0, a.x1, b.x0, b.x1)
				}
			}
			if n == 4 && upright != 0 {
				t.Errorf("%d upright value labels with 5 bars, want none", upright)
			}
			if n > 4 && upright != len(labels) {
				t.Errorf("%d of %d value labels upright", upright, len(labels))
			}
		})
	}
}

// cssValue returns the value of property prop in the report stylesheet's
// first rule whose selector is sel, or "".
func cssValue(t *testing.T, sel, prop string) string {
	t.Helper()
	m := regexp.MustCompile(`(?m)^` + regexp.QuoteMeta(sel) + ` \{([^}]*)\}`).FindStringSubmatch(reportHTML)
	if m == nil {
		t.Fatalf("no rule %q in the stylesheet", sel)
	}
	for _, d := range strings.Split(m[1], ";") {
		if k, v, ok := strings.Cut(d, ":"); ok && strings.TrimSpace(k) == prop {
			return strings.TrimSpace(v)
		}
	}
	return ""
}

// textWidth is a generous width of s in pixels at font size px in bold
// (the winner's row): figures and letters 0.7 em, as the bold figures of
// DejaVu Sans, the widest common sans and headless Chromium's on Debian.
func textWidth(s string, px float64) float64 {
	em := 0.0
	for _, r := range s {
		switch r {
		case '.', ',', ':', ' ':
			em += 0.38
		case '±':
			em += 0.84
		case '%', '–':
			em += 1.0
		default:
			em += 0.7
		}
	}
	return em * px
}

// TestReportTableFitsPage checks the stylesheet rules that let the
// candidates table fit a page 1,280 px wide (bench/report-check.sh measures
// it in a browser): the header cells wrap between words and the candidate
// column anywhere, so the table's narrowest width, every number cell on one
// line, stays within the body's text column, for the widest table (three
// metrics, the train score, --timings' fit seconds) with a long name.
func TestReportTableFitsPage(t *testing.T) {
	r := regressionResult()
	metrics := func(m float64) []Metric {
		return []Metric{{Name: "rmse", Stat: Stat{m, 0.291}}, {Name: "mae", Stat: Stat{m * 0.7, 0.205}}, {Name: "r2", Stat: Stat{0.4312, 0.0123}}}
	}
	col := &r.Columns[0]
	col.Candidates = []CandidateResult{
		cand("target:blend=20,10:prior=prefix3+freq+topk:100+hash:1024:signed:seed=7", 14.71, 0.291, false, true, metrics(14.71)...),
		cand("target:insample", 15.02, 0.288, true, false, metrics(15.02)...),
	}
	for i := range col.Candidates {
		col.Candidates[i].OutputColumns = 1127
		col.Candidates[i].UnseenShare = 0.1286
	}
	var buf bytes.Buffer
	if err := WriteReportTo(&buf, r); err != nil {
		t.Fatal(err)
	}
	html := parseXML(t, buf.Bytes())
	table := html.all(elem("table", ""))[0]
	rows := table.all(elem("tr", ""))
	heads := rows[0].all(elem("th", ""))
	if len(heads) != 8 {
		t.Fatalf("%d columns, want the widest table's 8", len(heads))
	}

	px := func(v, unit string, em float64) float64 {
		f, err := strconv.ParseFloat(strings.TrimSuffix(v, unit), 64)
		if err != nil || !strings.HasSuffix(v, unit) {
			t.Fatalf("%q is not in %s", v, unit)
		}
		return f * em
	}
	column := px(cssValue(t, "body", "max-width"), "px", 1)
	font := 16 * px(cssValue(t, "table", "font-size"), "em", 1)
	pad := strings.Fields(cssValue(t, "th, td", "padding"))
	padX := 2 * px(pad[len(pad)-1], "px", 1)
	// A cell's narrowest width: its longest word where it wraps between
	// words, nothing where it wraps anywhere, else all of its text.
	minWidth := func(text, wrap string) float64 {
		switch wrap {
		case "anywhere":
			return 0
		case "words":
			w := 0.0
			for _, word := range strings.Fields(text) {
				w = math.Max(w, textWidth(word, font))
			}
			return w
		}
		return textWidth(text, font)
	}
	first := "th:first-child, td:first-child"
	nameWrap, headWrap := "words", ""
	if cssValue(t, first, "overflow-wrap") == "anywhere" {
		nameWrap = "anywhere"
	}
	if cssValue(t, "th", "white-space") == "normal" {
		headWrap = "words"
	}
	least := 0.0
	for c := range heads {
		w, hw, cw := 0.0, headWrap, "" // number cells stay on one line
		if c == 0 {
			w, hw, cw = px(cssValue(t, first, "min-width"), "em", font), nameWrap, nameWrap
		}
		w = math.Max(w, minWidth(heads[c].allText(), hw))
		for _, row := range rows[1:] {
			if cells := row.all(elem("td", "")); len(cells) > 0 { // not a group's heading
				w = math.Max(w, minWidth(cells[c].allText(), cw))
			}
		}
		least += w + padX
	}
	if least > column {
		t.Errorf("the table needs at least %.0f px, the text column is %.0f px", least, column)
	}
}
