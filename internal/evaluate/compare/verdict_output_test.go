package compare

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"regexp"
	"slices"
	"strings"
	"sync"
	"testing"
)

// verdictCSV is a generated table of 3000 rows: columns a and b of 40
// levels each, whose effects on the log-odds of late are drawn from
// N(0, 1) independently, and noise, 500 levels that carry nothing.
func verdictCSV(seed uint64) string {
	rng := splitmix64(seed)
	normal := func() float64 {
		u1 := (float64(rng.next()>>11) + 0.5) / (1 << 53)
		u2 := float64(rng.next()>>11) / (1 << 53)
		return math.Sqrt(-2*math.Log(u1)) * math.Cos(2*math.Pi*u2)
	}
	ea, eb := make([]float64, 40), make([]float64, 40)
	for l := range ea {
		ea[l], eb[l] = normal(), normal()
	}
	var b strings.Builder
	b.WriteString("late,a,b,noise\n")
	for i := 0; i < 3000; i++ {
		la, lb, ln := rng.next()%40, rng.next()%40, rng.next()%500
		p := 1 / (1 + math.Exp(-(math.Log(0.3/0.7) + ea[la] + eb[lb])))
		late := 0
		if float64(rng.next()>>11)/(1<<53) < p {
			late = 1
		}
		fmt.Fprintf(&b, "%d,A%02d,B%02d,N%03d\n", late, la, lb, ln)
	}
	return b.String()
}

var verdictOnce struct {
	sync.Once
	res              *Result
	text, js, report []byte
	err              error
}

// verdictOutputs runs compare once on verdictCSV with --joint and returns
// its result, text, JSON and HTML report. topk:60 and topk:70 keep every
// level of a and b, so they tie on every fold; noise has no clear winner.
func verdictOutputs(t *testing.T) (*Result, string, []byte, []byte) {
	t.Helper()
	o := &verdictOnce
	o.Do(func() {
		cands, err := ParseCandidates("prior,target:insample,target:eb,freq,topk:60,topk:70")
		if err != nil {
			o.err = err
			return
		}
		o.res, o.err = Run(csvReader(t, verdictCSV(11)), Options{Target: "late", Columns: []string{"a", "b", "noise"},
			Candidates: cands, Folds: 5, InnerFolds: 3, Seed: 3, NoTimings: true, Joint: true, File: "verdict.csv"})
		if o.err != nil {
			return
		}
		var tb, jb, hb bytes.Buffer
		if o.err = WriteText(&tb, o.res); o.err != nil {
			return
		}
		if o.err = WriteJSON(&jb, o.res); o.err != nil {
			return
		}
		o.err = WriteReportTo(&hb, o.res)
		o.text, o.js, o.report = tb.Bytes(), jb.Bytes(), hb.Bytes()
	})
	if o.err != nil {
		t.Fatal(o.err)
	}
	return o.res, string(o.text), o.js, o.report
}

// jsonDoc decodes the JSON output generically, so that the tests read
// what a script reads, not the Go values behind it.
func jsonDoc(t *testing.T, js []byte) map[string]any {
	t.Helper()
	var doc map[string]any
	if err := json.Unmarshal(js, &doc); err != nil {
		t.Fatal(err)
	}
	return doc
}

// jsonNumbers returns every number in a decoded JSON value.
func jsonNumbers(v any) []float64 {
	var out []float64
	switch x := v.(type) {
	case float64:
		out = append(out, x)
	case map[string]any:
		for _, e := range x {
			out = append(out, jsonNumbers(e)...)
		}
	case []any:
		for _, e := range x {
			out = append(out, jsonNumbers(e)...)
		}
	}
	return out
}

// figureIn reports whether a figure of a reading is one of nums as the
// reading prints it: a metric or gain to four decimals (a gain's size
// without its sign), or a p-value ("< 0.0001" for one below).
func figureIn(fig string, below bool, nums []float64) bool {
	for _, v := range nums {
		switch {
		case below && fig == "0.0001" && v < 0.0001 && v >= 0:
			return true
		case !below && (num(v) == fig || num(math.Abs(v)) == fig || pval(v) == fig):
			return true
		}
	}
	return false
}

var readingFigure = regexp.MustCompile(`(< )?-?\d+(\.\d+)?`)

// checkReadingFigures finds every figure of a reading in the JSON object
// obj: the decimals among its numbers, a count (the candidates the test
// cannot tell apart, the columns joined) equal to count. The names in it
// (candidates, columns) are taken out first, as they may hold digits.
func checkReadingFigures(t *testing.T, where, reading string, names []string, obj any, count int) {
	t.Helper()
	slices.SortFunc(names, func(a, b string) int { return len(b) - len(a) })
	s := strings.ReplaceAll(reading, "95% interval", "interval")
	for _, n := range names {
		s = strings.ReplaceAll(s, n, "NAME")
	}
	nums := jsonNumbers(obj)
	figs := readingFigure.FindAllStringSubmatch(s, -1)
	if len(figs) == 0 {
		t.Errorf("%s: no figures in the reading %q", where, reading)
	}
	for _, m := range figs {
		fig, below := strings.TrimPrefix(m[0], "< "), m[1] != ""
		if m[2] == "" {
			if fig != fmt.Sprint(count) {
				t.Errorf("%s: the reading's count %s is not the JSON's %d (reading %q)", where, fig, count, reading)
			}
			continue
		}
		if !figureIn(fig, below, nums) {
			t.Errorf("%s: the reading's figure %q is not in the JSON (reading %q)", where, m[0], reading)
		}
	}
}

// TestReadingFiguresInJSON: every figure of every reading the text prints
// (each column's, the joint model's) is in the JSON's verdict of that
// column or its joint object, as the reading prints it.
func TestReadingFiguresInJSON(t *testing.T) {
	_, text, js, _ := verdictOutputs(t)
	t.Logf("the text:\n%s", text)
	doc := jsonDoc(t, js)
	var readings []string
	for _, l := range strings.Split(text, "\n") {
		if r, ok := strings.CutPrefix(l, "reading: "); ok {
			readings = append(readings, r)
		}
	}
	cols := doc["columns"].([]any)
	if len(readings) != len(cols)+1 {
		t.Fatalf("%d readings in the text, want one per column (%d) and the joint model's:\n%s", len(readings), len(cols), text)
	}
	for i, c := range cols {
		col := c.(map[string]any)
		var names []string
		for _, k := range col["candidates"].([]any) {
			names = append(names, k.(map[string]any)["name"].(string))
		}
		v := col["verdict"].(map[string]any)
		eq, _ := v["equivalent"].([]any)
		checkReadingFigures(t, col["column"].(string), readings[i], names, v, len(eq)+1)
	}
	j := doc["joint"].(map[string]any)
	names := []string{j["encodings"].(string), j["over_best_column"].(map[string]any)["over"].(string)}
	checkReadingFigures(t, "joint", readings[len(cols)], names, j, len(j["columns"].([]any)))
}

// TestVerdictFlagsInJSON: a column without a clear winner has winner null
// in the JSON (the column's and the verdict's) and no candidate flagged;
// exact ties are flagged on the candidates and listed in the verdict, and
// marked in the text and the report's table.
func TestVerdictFlagsInJSON(t *testing.T) {
	res, text, js, report := verdictOutputs(t)
	doc := jsonDoc(t, js)
	sawNone, sawTie := false, false
	for ci, c := range doc["columns"].([]any) {
		col := c.(map[string]any)
		name, v := col["column"].(string), col["verdict"].(map[string]any)
		if w, ok := col["winner"]; !ok || (w == nil) != (v["winner"] == nil) {
			t.Errorf("%s: winner %v, the verdict's %v", name, w, v["winner"])
		}
		flagged := 0
		var ties []string
		for _, k := range col["candidates"].([]any) {
			k := k.(map[string]any)
			if k["winner"].(bool) {
				flagged++
				if k["name"] != col["winner"] {
					t.Errorf("%s: candidate %v flagged, the winner is %v", name, k["name"], col["winner"])
				}
			}
			if k["tie"].(bool) {
				ties = append(ties, k["name"].(string))
			}
		}
		if col["winner"] == nil {
			sawNone = true
			if flagged != 0 || !strings.Contains(col["reading"].(string), "no clear winner") {
				t.Errorf("%s: winner null, but %d candidates flagged; reading %q", name, flagged, col["reading"])
			}
		} else if flagged != 1 {
			t.Errorf("%s: winner %v, %d candidates flagged", name, col["winner"], flagged)
		}
		var listed []string
		tl, ok := v["ties"].([]any)
		if !ok {
			t.Errorf("%s: the verdict's ties are %v, want a list (empty when none)", name, v["ties"])
		}
		for _, x := range tl {
			listed = append(listed, x.(string))
		}
		if len(ties) > 0 || len(listed) > 0 {
			sawTie = true
			if !slices.Equal(ties, listed) {
				t.Errorf("%s: candidates flagged as ties %v, the verdict lists %v", name, ties, listed)
			}
			for _, tie := range ties {
				if !regexp.MustCompile(`(?m)^ +\d+  ` + regexp.QuoteMeta(tie) + ` .*= tie with the best$`).MatchString(text) {
					t.Errorf("%s: the text does not mark %s a tie:\n%s", name, tie, text)
				}
			}
			sec := parseXML(t, report).all(elem("section", "column"))[ci]
			for _, row := range sec.all(elem("tr", "tie")) {
				cell := row.all(elem("td", ""))[0].allText()
				if !slices.Contains(ties, strings.TrimSuffix(cell, " (tie with the best)")) {
					t.Errorf("%s: the report marks %q a tie; the JSON's ties are %v", name, cell, ties)
				}
				ties = slices.DeleteFunc(ties, func(s string) bool { return s+" (tie with the best)" == cell })
			}
			if len(ties) > 0 {
				t.Errorf("%s: the report does not mark %v as ties", name, ties)
			}
		}
	}
	if !sawNone || !sawTie {
		t.Errorf("the generated table gave no column without a winner (%v) or no tie (%v): the test checks nothing; readings:\n%s",
			sawNone, sawTie, readingsOf(res))
	}
}

func readingsOf(r *Result) string {
	var b strings.Builder
	for _, c := range r.Columns {
		fmt.Fprintf(&b, "%s: %s\n", c.Column, c.Reading)
	}
	return b.String()
}

// TestJSONMetricNames: every metric in the JSON carries its name, the
// candidates' and the joint model's, in the order of the text table's
// columns.
func TestJSONMetricNames(t *testing.T) {
	res, _, js, _ := verdictOutputs(t)
	doc := jsonDoc(t, js)
	if res.Task != "binary" {
		t.Fatalf("task %s, want binary", res.Task)
	}
	want := []string{"auc", "log_loss", "brier"}
	check := func(where string, ms any) {
		var got []string
		for _, m := range ms.([]any) {
			n, _ := m.(map[string]any)["name"].(string)
			got = append(got, n)
		}
		if !slices.Equal(got, want) {
			t.Errorf("%s: metric names %q in the JSON, want %q", where, got, want)
		}
	}
	for _, c := range doc["columns"].([]any) {
		for _, k := range c.(map[string]any)["candidates"].([]any) {
			k := k.(map[string]any)
			check(k["name"].(string), k["metrics"])
		}
	}
	check("joint", doc["joint"].(map[string]any)["metrics"])
}

// TestReportJointSection: the report has the joint model's section, whose
// figures are the JSON's as the text prints them: its table's heads are the
// metrics' names as in the text table, its first row the joint model's
// scores, then each joined column's winner alone, and its reading is the
// JSON's (the gain over the best column, its interval and p-value).
func TestReportJointSection(t *testing.T) {
	_, text, js, report := verdictOutputs(t)
	doc := jsonDoc(t, js)
	j := doc["joint"].(map[string]any)
	html := parseXML(t, report)
	secs := html.all(elem("section", "joint"))
	if len(secs) != 1 {
		t.Fatalf("%d joint sections in the report, want 1", len(secs))
	}
	sec := secs[0]
	cell := func(m any) string {
		m2 := m.(map[string]any)
		return num(m2["mean"].(float64)) + " ± " + num(m2["std"].(float64))
	}
	ms := j["metrics"].([]any)
	heads := sec.all(elem("th", ""))
	if len(heads) != len(ms)+1 {
		t.Fatalf("%d heads, want the model and %d metrics", len(heads), len(ms))
	}
	for i, m := range ms {
		want := metricLabel(m.(map[string]any)["name"].(string))
		if i == 0 {
			want += " mean ± sd" // as the text table heads the primary metric
			if !strings.Contains(text, "  "+want) {
				t.Errorf("head %q is not the text table's", want)
			}
		}
		if got := heads[i+1].allText(); got != want {
			t.Errorf("head %d: %q, want %q", i+1, got, want)
		}
	}
	rows := sec.all(elem("tr", ""))[1:]
	cols := j["columns"].([]any)
	if len(rows) != 1+len(cols) {
		t.Fatalf("%d rows, want the joint model and %d columns", len(rows), len(cols))
	}
	checkRow := func(row *node, name string, metrics []any) {
		cells := row.all(elem("td", ""))
		if got := cells[0].allText(); !strings.HasPrefix(got, name) {
			t.Errorf("row %q, want %q", got, name)
		}
		for i, m := range metrics {
			if got, want := cells[i+1].allText(), cell(m); got != want {
				t.Errorf("%s, %s: %q in the report, the JSON's %q", name, heads[i+1].allText(), got, want)
			}
		}
	}
	checkRow(rows[0], fmt.Sprintf("one model over the %d winners", len(cols)), ms)
	if rows[0].class() != "joint" {
		t.Errorf("the joint model's row has class %q", rows[0].class())
	}
	primary := cell(ms[0])
	if !strings.Contains(text, j["encodings"].(string)+": AUC "+primary+"\n") {
		t.Errorf("the joint model's %s is not the text's:\n%s", primary, text)
	}
	for i, c := range cols {
		for _, col := range doc["columns"].([]any) {
			col := col.(map[string]any)
			if col["column"] != c {
				continue
			}
			for _, k := range col["candidates"].([]any) {
				if k := k.(map[string]any); k["winner"].(bool) {
					checkRow(rows[i+1], c.(string)+"="+k["name"].(string)+" alone", k["metrics"].([]any))
				}
			}
		}
		name := rows[i+1].all(elem("td", ""))[0].allText()
		if best := strings.HasSuffix(name, " (best column)"); best != (c == j["best_column"]) {
			t.Errorf("row %q: marked the best column %v, the JSON's best column is %v", name, best, j["best_column"])
		}
	}
	readings := sec.all(elem("p", "reading"))
	if len(readings) != 1 || readings[0].allText() != j["reading"] {
		t.Errorf("the section's reading is not the JSON's %q", j["reading"])
	}
	g := j["over_best_column"].(map[string]any)
	for _, f := range []string{num(math.Abs(g["mean"].(float64))), num(g["low"].(float64)), num(g["high"].(float64)), pval(g["p_value"].(float64))} {
		if !strings.Contains(readings[0].allText(), f) {
			t.Errorf("the section's reading lacks the gain's figure %s", f)
		}
	}
	// The navigation links to it.
	if !slices.ContainsFunc(html.all(elem("a", "")), func(a *node) bool { return a.attrs["href"] == "#joint" }) {
		t.Error("no link to the joint section")
	}
}

// TestReportJointNothingToJoin: with fewer than two winners the joint
// section gives the reading alone, no table.
func TestReportJointNothingToJoin(t *testing.T) {
	r := binaryResult()
	r.Joint = &JointResult{Columns: []string{"sender_account"}, Encodings: "sender_account=target:eb", Reading: "1 column(s) with a winner: nothing to join"}
	var b bytes.Buffer
	if err := WriteReportTo(&b, r); err != nil {
		t.Fatal(err)
	}
	secs := parseXML(t, b.Bytes()).all(elem("section", "joint"))
	if len(secs) != 1 || len(secs[0].all(elem("table", ""))) != 0 || !strings.Contains(secs[0].allText(), r.Joint.Reading) {
		t.Errorf("joint sections %d; want one with the reading and no table", len(secs))
	}
	r.Joint = nil
	b.Reset()
	if err := WriteReportTo(&b, r); err != nil {
		t.Fatal(err)
	}
	if n := len(parseXML(t, b.Bytes()).all(elem("section", "joint"))); n != 0 {
		t.Errorf("%d joint sections without --joint", n)
	}
}

// TestOutputsEndWithEncodeCommand: the text, the JSON and the report each
// end with the encode command that carries out the verdict (the JSON's
// last field, the report's last section), and the text and the report say
// which fold rule and which test.
func TestOutputsEndWithEncodeCommand(t *testing.T) {
	res, text, js, report := verdictOutputs(t)
	cmd := res.EncodeCommand
	if cmd == "" || !strings.HasPrefix(cmd, "manyfold encode ") {
		t.Fatalf("encode command %q", cmd)
	}
	lines := strings.Split(strings.TrimRight(text, "\n"), "\n")
	if got := strings.TrimSpace(lines[len(lines)-1]); got != cmd {
		t.Errorf("the text ends with %q, want the encode command %q", got, cmd)
	}
	dec := json.NewDecoder(bytes.NewReader(js))
	var last string
	depth := 0
	for {
		tok, err := dec.Token()
		if err != nil {
			break
		}
		switch tok := tok.(type) {
		case json.Delim:
			if tok == '{' || tok == '[' {
				depth++
			} else {
				depth--
			}
		case string:
			if depth == 1 && dec.More() {
				last = tok // a key of the top object (its values are skipped below)
				var skip json.RawMessage
				if err := dec.Decode(&skip); err != nil {
					t.Fatal(err)
				}
				if last == "encode_command" && string(skip) != fmt.Sprintf("%q", cmd) {
					t.Errorf("encode_command %s, want %q", skip, cmd)
				}
			}
		}
	}
	if last != "encode_command" {
		t.Errorf("the JSON's last field is %q, want encode_command", last)
	}
	html := parseXML(t, report)
	body := html.all(elem("body", ""))[0]
	var secs []*node
	for _, c := range body.children {
		if c.name == "section" {
			secs = append(secs, c)
		}
	}
	if len(secs) == 0 || secs[len(secs)-1].attrs["id"] != "next" || secs[len(secs)-1].all(elem("code", ""))[0].allText() != cmd {
		t.Errorf("the report's last section is not the encode command %q", cmd)
	}
	if n := strings.Count(string(report), "<code>"); n != 1 {
		t.Errorf("the command appears %d times in the report, want once", n)
	}
	if !strings.Contains(text, "fold rule "+res.FoldBy) || !strings.Contains(text, "\ntest: "+testName+"\n") {
		t.Errorf("the text does not say the fold rule and the test:\n%s", text)
	}
	header := map[string]string{}
	var key string
	for _, c := range html.all(elem("dl", "meta"))[0].children {
		if c.name == "dt" {
			key = c.allText()
		} else if c.name == "dd" {
			header[key] = c.allText()
		}
	}
	if header["Fold rule"] != res.FoldBy || header["Test"] != testName {
		t.Errorf("the report's header says fold rule %q and test %q", header["Fold rule"], header["Test"])
	}
}

// TestBestColumnByWinner: the joint model is measured against the column
// whose winner scores best alone, not the column whose best candidate
// does (the winner is the simplest of the candidates the test cannot tell
// from the best, which may score a little lower).
func TestBestColumnByWinner(t *testing.T) {
	col := func(name string, best, win float64) ColumnResult {
		c := ColumnResult{Column: name, Candidates: []CandidateResult{
			{Name: "target:eb+freq", Primary: Stat{Mean: best}},
			{Name: "target:eb", Primary: Stat{Mean: win}, Winner: true},
		}}
		c.Verdict.BestMean = best
		return c
	}
	none := ColumnResult{Column: "none", Candidates: []CandidateResult{{Name: "freq", Primary: Stat{Mean: 0.99}}}}
	tests := []struct {
		cols   []ColumnResult
		higher bool
		want   int
	}{
		{[]ColumnResult{col("x", 0.80, 0.70), col("y", 0.76, 0.75)}, true, 1},
		{[]ColumnResult{none, col("x", 0.80, 0.78), col("y", 0.76, 0.75)}, true, 1},
		{[]ColumnResult{col("x", 3.0, 3.5), col("y", 3.2, 3.3)}, false, 1}, // RMSE: lower is better
		{[]ColumnResult{col("x", 3.0, 3.1), col("y", 3.2, 3.3)}, false, 0},
		{[]ColumnResult{none}, true, -1},
	}
	for i, tc := range tests {
		if got := bestColumn(tc.cols, tc.higher); got != tc.want {
			t.Errorf("case %d: best column %d, want %d", i, got, tc.want)
		}
	}
}

// TestTimingsOnlyWithFlag: the fit seconds appear in the text, the JSON
// and the report only when timed (--timings), and then for every
// candidate.
func TestTimingsOnlyWithFlag(t *testing.T) {
	cands, err := ParseCandidates("prior,target:eb,freq")
	if err != nil {
		t.Fatal(err)
	}
	for _, timed := range []bool{false, true} {
		res, err := Run(csvReader(t, verdictCSV(5)), Options{Target: "late", Columns: []string{"a"}, Candidates: cands,
			Folds: 3, InnerFolds: 2, Seed: 1, NoTimings: !timed})
		if err != nil {
			t.Fatal(err)
		}
		var tb, jb, hb bytes.Buffer
		if err := WriteText(&tb, res); err != nil {
			t.Fatal(err)
		}
		if err := WriteJSON(&jb, res); err != nil {
			t.Fatal(err)
		}
		if err := WriteReportTo(&hb, res); err != nil {
			t.Fatal(err)
		}
		text, js, report := tb.String(), jb.String(), hb.String()
		if got := strings.Contains(text, "  secs  "); got != timed {
			t.Errorf("timed %v: the text has a secs column: %v\n%s", timed, got, text)
		}
		if got := strings.Count(js, `"fit_seconds": `); (got > 0) != timed || (timed && got != len(cands)) {
			t.Errorf("timed %v: %d fit_seconds in the JSON, want %d", timed, got, map[bool]int{true: len(cands)}[timed])
		}
		if got := strings.Contains(report, "<th>fit seconds</th>"); got != timed {
			t.Errorf("timed %v: the report has a fit seconds column: %v", timed, got)
		}
	}
}

// TestNoWinnerSaysNoCommand: when no column has a clear winner the text
// and the report end by saying there is no encode command, and the JSON's
// encode_command is empty.
func TestNoWinnerSaysNoCommand(t *testing.T) {
	r := binaryResult()
	r.EncodeCommand = ""
	var tb, jb, hb bytes.Buffer
	if err := WriteText(&tb, r); err != nil {
		t.Fatal(err)
	}
	if err := WriteJSON(&jb, r); err != nil {
		t.Fatal(err)
	}
	if err := WriteReportTo(&hb, r); err != nil {
		t.Fatal(err)
	}
	if !strings.HasSuffix(tb.String(), "\n\n"+noCommand+"\n") {
		t.Errorf("the text does not end with %q:\n%s", noCommand, tb.String())
	}
	if doc := jsonDoc(t, jb.Bytes()); doc["encode_command"] != "" {
		t.Errorf("encode_command %v, want empty", doc["encode_command"])
	}
	secs := parseXML(t, hb.Bytes()).all(elem("section", "next"))
	if len(secs) != 1 || strings.TrimSpace(secs[0].all(elem("p", "command"))[0].allText()) != noCommand {
		t.Errorf("the report's last section does not say %q", noCommand)
	}
}

// TestJointNothingToJoinJSON: with fewer than two winners the joint
// object has no score (primary null) and empty lists, not a score of 0.
func TestJointNothingToJoinJSON(t *testing.T) {
	r := &Result{Joint: &JointResult{Reading: "0 column(s) with a winner: nothing to join"}}
	var b bytes.Buffer
	if err := WriteJSON(&b, r); err != nil {
		t.Fatal(err)
	}
	j := jsonDoc(t, b.Bytes())["joint"].(map[string]any)
	for _, k := range []string{"columns", "metrics", "per_fold"} {
		if l, ok := j[k].([]any); !ok || len(l) != 0 {
			t.Errorf("%s: %v, want []", k, j[k])
		}
	}
	if p, ok := j["primary"]; !ok || p != nil {
		t.Errorf("primary %v, want null", j["primary"])
	}
	// A joint model that was fitted keeps its score.
	_, _, js, _ := verdictOutputs(t)
	if p, ok := jsonDoc(t, js)["joint"].(map[string]any)["primary"].(map[string]any); !ok || p["mean"].(float64) <= 0.5 {
		t.Errorf("the fitted joint model's primary is %v", p)
	}
}

// TestReportWinnerNamedWinner: the report calls the winner the winner, as
// the text does ("<- winner"): it is the simplest candidate the test cannot
// tell from the best, not always the best ranked, so "best" beside it would
// contradict the ranking above it.
func TestReportWinnerNamedWinner(t *testing.T) {
	_, _, _, report := verdictOutputs(t)
	html := parseXML(t, report)
	if strings.Contains(html.allText(), "(best)") || strings.Contains(html.allText(), "best candidate") {
		t.Error("the report calls a candidate best")
	}
	for i, sec := range html.all(elem("section", "column")) {
		rows := sec.all(elem("tr", "winner"))
		var labels []string
		for _, tx := range sec.all(elem("text", "")) {
			if strings.Contains(tx.allText(), "winner") {
				labels = append(labels, tx.allText())
			}
		}
		if i == 2 { // noise: no winner, only the legend names one
			if len(rows) != 0 || len(labels) != 1 {
				t.Errorf("column %d: %d winner rows, %d texts naming the winner: %q", i, len(rows), len(labels), labels)
			}
			continue
		}
		if len(rows) != 1 || !strings.HasSuffix(rows[0].all(elem("td", ""))[0].allText(), " (winner)") {
			t.Errorf("column %d: the winner's row is not marked (winner)", i)
		}
		if len(labels) != 2 { // the bar's label or note, and the legend
			t.Errorf("column %d: texts naming the winner %q, want the bar's and the legend's", i, labels)
		}
	}
}

// TestPriorAlwaysScored: a candidate list without the prior gets it, so
// that the verdict can name a winner (it measures the gain over the prior);
// the list given is not changed.
func TestPriorAlwaysScored(t *testing.T) {
	cands, err := ParseCandidates("target:eb,freq")
	if err != nil {
		t.Fatal(err)
	}
	res, err := Run(csvReader(t, verdictCSV(5)), Options{Target: "late", Columns: []string{"a"}, Candidates: cands,
		Folds: 3, InnerFolds: 2, Seed: 1, NoTimings: true})
	if err != nil {
		t.Fatal(err)
	}
	c := res.Columns[0]
	var names []string
	for _, k := range c.Candidates {
		names = append(names, k.Name)
	}
	if !slices.Equal(names, []string{"target:eb", "freq", "prior"}) || !c.Candidates[2].Baseline {
		t.Errorf("candidates %v, want target:eb, freq and the prior baseline", names)
	}
	if c.Winner == nil || *c.Winner != "target:eb" || c.Verdict.OverPrior == nil {
		t.Errorf("winner %v, over the prior %+v; reading %q", c.Winner, c.Verdict.OverPrior, c.Reading)
	}
	if len(cands) != 2 {
		t.Errorf("the caller's list grew to %d", len(cands))
	}
}
