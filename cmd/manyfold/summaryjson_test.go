package main

import (
	"encoding/csv"
	"encoding/json"
	"fmt"
	"maps"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"sort"
	"strconv"
	"strings"
	"testing"
)

// jsonRows generates n rows of flights for the --json tests: a city of 60
// (some empty), a route of 8, a delay in minutes (some empty), a label y
// that is 0 or 1 but for one stray "maybe" and some empty ones, and an
// amount. first offsets the cities, so that a second file holds cities
// the first lacks.
func jsonRows(n, first int) string {
	var b strings.Builder
	b.WriteString("city,route,delay,y,amount\n")
	for i := 0; i < n; i++ {
		city := fmt.Sprintf("c%02d", first+i*7%60)
		if i%53 == 0 {
			city = ""
		}
		delay := strconv.Itoa(i * 13 % 47)
		if i%97 == 0 {
			delay = ""
		}
		y := strconv.Itoa(i * 11 % 10 / 7)
		switch {
		case i == 5:
			y = "maybe"
		case i%89 == 0:
			y = ""
		}
		fmt.Fprintf(&b, "%s,r%d,%s,%s,%d.5\n", city, i%8, delay, y, i%31)
	}
	return b.String()
}

// csvColumns reads a CSV file with the standard library: its header and
// each column's cells.
func csvColumns(t *testing.T, path string) ([]string, map[string][]string) {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	recs, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	cols := map[string][]string{}
	for _, r := range recs[1:] {
		for j, name := range recs[0] {
			cols[name] = append(cols[name], r[j])
		}
	}
	return recs[0], cols
}

// decodeDoc parses the one JSON document of a run's standard output.
func decodeDoc(t *testing.T, stdout string) map[string]any {
	t.Helper()
	dec := json.NewDecoder(strings.NewReader(stdout))
	var d map[string]any
	if err := dec.Decode(&d); err != nil {
		t.Fatalf("standard output is not a JSON document: %v\n%s", err, stdout)
	}
	if dec.More() {
		t.Fatalf("standard output holds more than one document:\n%s", stdout)
	}
	return d
}

// wantField fails the test unless doc[key] is want (compared as JSON).
func wantField(t *testing.T, doc map[string]any, key string, want any) {
	t.Helper()
	got, ok := doc[key]
	if !ok {
		t.Errorf("no field %q", key)
		return
	}
	g, _ := json.Marshal(got)
	w, _ := json.Marshal(want)
	if string(g) != string(w) {
		t.Errorf("%s = %s, want %s", key, g, w)
	}
}

// elapsedRe finds the summary line's time.
var elapsedRe = regexp.MustCompile(` in ([0-9.]+)s;`)

// checkElapsed checks elapsed_seconds against the summary line's time,
// printed to a tenth of a second.
func checkElapsed(t *testing.T, doc map[string]any, stderr string) {
	t.Helper()
	m := elapsedRe.FindStringSubmatch(stderr)
	if m == nil {
		t.Fatalf("no time on the summary line: %s", stderr)
	}
	text, _ := strconv.ParseFloat(m[1], 64)
	got, ok := doc["elapsed_seconds"].(float64)
	if !ok || got < 0 || math.Abs(got-text) > 0.051 {
		t.Errorf("elapsed_seconds = %v, the summary line says %ss", doc["elapsed_seconds"], m[1])
	}
}

// wantClasses recomputes the classes of labels (the empty ones unknown):
// rows, share of the known rows, and the stray flag (fewer than 10 rows
// or under 0.1%), in sorted order.
func wantClasses(labels []string) []map[string]any {
	counts := map[string]int{}
	known := 0
	for _, l := range labels {
		if l != "" {
			counts[l]++
			known++
		}
	}
	var names []string
	for l := range counts {
		names = append(names, l)
	}
	sort.Strings(names)
	out := []map[string]any{}
	for _, l := range names {
		n := counts[l]
		out = append(out, map[string]any{"class": l, "rows": n, "share": float64(n) / float64(known),
			"stray": n < 10 || float64(n) < 0.001*float64(known)})
	}
	return out
}

// distinct counts the distinct cells, the empty one (null) included.
func distinct(cells []string) int {
	seen := map[string]bool{}
	for _, c := range cells {
		seen[c] = true
	}
	return len(seen)
}

// warningLines returns the "warning: " lines of stderr, without the
// prefix.
func warningLines(stderr string) []string {
	out := []string{}
	for _, l := range strings.Split(stderr, "\n") {
		if w, ok := strings.CutPrefix(l, "warning: "); ok {
			out = append(out, w)
		}
	}
	return out
}

// checkColumns checks the columns of a document: names, encodings as
// given, and outputs that are the output file's columns after the input's,
// in order; with levels, the distinct values of each input column.
func checkColumns(t *testing.T, doc map[string]any, in map[string][]string, inHeader []string, out string, names, encodings []string, levels bool) {
	t.Helper()
	cols, _ := doc["columns"].([]any)
	if len(cols) != len(names) {
		t.Fatalf("columns = %v, want %d", doc["columns"], len(names))
	}
	outHeader, _ := csvColumns(t, out)
	var outputs []string
	for i, c := range cols {
		cm := c.(map[string]any)
		wantField(t, cm, "column", names[i])
		if levels {
			wantField(t, cm, "levels", distinct(in[names[i]]))
		} else if _, ok := cm["levels"]; ok {
			t.Errorf("apply's column %s has levels", names[i])
		}
		encs, _ := cm["encodings"].([]any)
		if len(encs) != len(encodings) {
			t.Fatalf("column %s: encodings %v, want %v", names[i], encs, encodings)
		}
		for j, e := range encs {
			em := e.(map[string]any)
			wantField(t, em, "encoding", encodings[j])
			outs, _ := em["outputs"].([]any)
			if len(outs) == 0 {
				t.Errorf("column %s, %s: no outputs", names[i], encodings[j])
			}
			for _, o := range outs {
				s := o.(string)
				if !strings.HasPrefix(s, names[i]+"_") {
					t.Errorf("column %s: output %q", names[i], s)
				}
				outputs = append(outputs, s)
			}
		}
	}
	if got := outHeader[len(inHeader):]; !slices.Equal(got, outputs) {
		t.Errorf("the output's encoded columns are %v, the document's outputs %v", got, outputs)
	}
}

// TestEncodeJSON: encode --json prints one document whose every field is
// what the run did: the paths, the rows and the rows with an empty target
// counted from the input, the summary line's time, the task, the target and
// a derived target's condition and positive class, each class's rows,
// share and stray flag recomputed from the input, each column's levels
// (distinct values of the input), encodings and the output columns each
// wrote (the output file's), and the warnings printed. --out - is refused
// with it.
func TestEncodeJSON(t *testing.T) {
	dir := t.TempDir()
	in := writeFile(t, dir, "flights.csv", jsonRows(1500, 0))
	header, cols := csvColumns(t, in)
	gt15 := make([]string, len(cols["delay"]))
	for i, d := range cols["delay"] {
		if d != "" {
			v, _ := strconv.Atoi(d)
			gt15[i] = map[bool]string{true: "1", false: "0"}[v > 15]
		}
	}
	count := func(cells []string) (empty int) {
		for _, c := range cells {
			if c == "" {
				empty++
			}
		}
		return empty
	}
	for _, tc := range []struct {
		name, target, task string
		labels             []string // nil: no classes
		expr               map[string]any
		positive           any
		methods            []string
		warns              bool
	}{
		{"stray", "y", "multiclass", cols["y"], nil, nil, []string{"target:eb", "freq", "hash:4"}, true},
		{"derived", "delay>15", "binary", gt15, map[string]any{"column": "delay", "operator": ">", "value": "15"}, "1", []string{"target:m=5", "topk:3"}, false},
		{"regression", "amount", "regression", nil, nil, nil, []string{"target:eb"}, false},
		{"none", "", "none", nil, nil, nil, []string{"freq:share"}, false},
	} {
		t.Run(tc.name, func(t *testing.T) {
			out, tables := filepath.Join(dir, tc.name+".csv"), filepath.Join(dir, "t-"+tc.name)
			args := []string{"encode", in, "--columns", "city,route", "--methods", strings.Join(tc.methods, "+"), "--out", out, "--tables", tables, "--json"}
			if tc.target != "" {
				args = append(args, "--target", tc.target)
			}
			res := mustRun(t, args...)
			doc := decodeDoc(t, res.stdout)
			wantField(t, doc, "input", in)
			wantField(t, doc, "output", out)
			wantField(t, doc, "tables", tables)
			wantField(t, doc, "rows", len(cols["city"]))
			missing := 0
			if tc.labels != nil {
				missing = count(tc.labels)
			} else if tc.target != "" {
				missing = count(cols[tc.target])
			}
			wantField(t, doc, "target_missing_rows", missing)
			checkElapsed(t, doc, res.stderr)
			wantField(t, doc, "task", tc.task)
			var target any
			if tc.target != "" {
				target = tc.target
			}
			wantField(t, doc, "target", target)
			wantField(t, doc, "target_expression", tc.expr)
			wantField(t, doc, "positive_class", tc.positive)
			classes := []map[string]any{}
			if tc.labels != nil {
				classes = wantClasses(tc.labels)
			}
			wantField(t, doc, "classes", classes)
			checkColumns(t, doc, cols, header, out, []string{"city", "route"}, tc.methods, true)
			warnings := warningLines(res.stderr)
			if tc.warns != (len(warnings) > 0) {
				t.Errorf("warnings printed: %q", warnings)
			}
			wantField(t, doc, "warnings", warnings)
			if _, ok := doc["failed"]; ok {
				t.Error("encode's document has failed")
			}
			if tc.name == "stray" && !strings.Contains(res.stderr, "maybe (1 row: a stray value?)") {
				t.Errorf("the summary line does not flag the stray value: %s", res.stderr)
			}
			if tc.name == "derived" && !strings.Contains(res.stderr, "target delay>15: binary, positive class 1 (") {
				t.Errorf("the summary line does not name the positive class: %s", res.stderr)
			}
		})
	}
	res := runCLI(t, "encode", in, "--columns", "city", "--methods", "freq", "--out", "-", "--format", "csv", "--tables", filepath.Join(dir, "t-stdout"), "--json")
	if res.code != exitUsage || !strings.Contains(res.stderr, "--json and --out - both write to standard output") || res.stdout != "" {
		t.Errorf("--json --out -: exit %d, stdout %q, stderr %s", res.code, res.stdout, res.stderr)
	}
}

// TestApplyJSON: apply --json prints the frame encode's has (paths, rows,
// time, task, target, encodings and outputs) with the reports written,
// each column's unseen rows and share recomputed from the two files, and
// the figures over --fail-on, also when apply exits 7 on them.
func TestApplyJSON(t *testing.T) {
	dir := t.TempDir()
	train := writeFile(t, dir, "train.csv", jsonRows(1200, 0))
	fresh := writeFile(t, dir, "fresh.csv", jsonRows(700, 25)) // cities c60 to c84 unseen
	tables := filepath.Join(dir, "tables")
	mustRun(t, "encode", train, "--target", "delay>15", "--columns", "city,route", "--methods", "target:eb+freq", "--out", filepath.Join(dir, "enc.csv"), "--tables", tables)
	_, trainCols := csvColumns(t, train)
	header, cols := csvColumns(t, fresh)
	out, report := filepath.Join(dir, "fresh-enc.csv"), filepath.Join(dir, "drift.json")
	res := runCLI(t, "apply", fresh, "--tables", tables, "--out", out, "--report", report, "--fail-on", "unseen=0.2", "--json")
	if res.code != exitDrift {
		t.Fatalf("exit %d, want %d: %s", res.code, exitDrift, res.stderr)
	}
	doc := decodeDoc(t, res.stdout)
	wantField(t, doc, "input", fresh)
	wantField(t, doc, "output", out)
	wantField(t, doc, "tables", tables)
	wantField(t, doc, "reports", []string{report})
	rows := len(cols["city"])
	wantField(t, doc, "rows", rows)
	checkElapsed(t, doc, res.stderr)
	wantField(t, doc, "task", "binary")
	wantField(t, doc, "target", "delay>15")
	wantField(t, doc, "target_expression", map[string]any{"column": "delay", "operator": ">", "value": "15"})
	wantField(t, doc, "positive_class", "1")
	wantField(t, doc, "warnings", []string{})
	for _, k := range []string{"classes", "target_missing_rows"} {
		if _, ok := doc[k]; ok {
			t.Errorf("apply's document has %s", k)
		}
	}
	checkColumns(t, doc, cols, header, out, []string{"city", "route"}, []string{"target:eb", "freq"}, false)
	var failed []map[string]any
	for i, name := range []string{"city", "route"} {
		seen := map[string]bool{}
		for _, v := range trainCols[name] {
			seen[v] = true
		}
		unseen := 0
		for _, v := range cols[name] {
			if !seen[v] {
				unseen++
			}
		}
		cm := doc["columns"].([]any)[i].(map[string]any)
		share := float64(unseen) / float64(rows)
		wantField(t, cm, "unseen_rows", unseen)
		wantField(t, cm, "unseen_share", share)
		if share > 0.2 {
			failed = append(failed, map[string]any{"column": name, "measure": "unseen", "value": share, "threshold": 0.2})
		}
	}
	if len(failed) != 1 {
		t.Fatalf("the generated files should shift city alone: %v", failed)
	}
	wantField(t, doc, "failed", failed)
}

// TestJSONFieldsInREADME: every field of encode's and apply's documents
// has a row in the README's table of them (a nested field is named in its
// parent's row), and every row names a field the documents have.
func TestJSONFieldsInREADME(t *testing.T) {
	b, err := os.ReadFile("../../README.md")
	if err != nil {
		t.Fatal(err)
	}
	text := string(b)
	start := strings.Index(text, "| `input`, `output`, `tables` |")
	if start < 0 {
		t.Fatal("README has no table of the --json fields")
	}
	rows := map[string]string{} // field: its row's description
	for _, line := range strings.Split(text[start:], "\n") {
		if !strings.HasPrefix(line, "|") {
			break
		}
		cells := strings.Split(line, "|")
		for _, f := range regexp.MustCompile("`([a-z_]+)`").FindAllStringSubmatch(cells[1], -1) {
			rows[f[1]] = cells[2]
		}
	}
	dir := t.TempDir()
	train := writeFile(t, dir, "train.csv", jsonRows(600, 0))
	fresh := writeFile(t, dir, "fresh.csv", jsonRows(300, 30))
	tables := filepath.Join(dir, "tables")
	enc := mustRun(t, "encode", train, "--target", "delay>15", "--columns", "city", "--out", filepath.Join(dir, "e.csv"), "--tables", tables, "--json")
	app := runCLI(t, "apply", fresh, "--tables", tables, "--out", filepath.Join(dir, "a.csv"), "--report", filepath.Join(dir, "d.json"), "--fail-on", "unseen=0.1", "--json")
	have := map[string]bool{}
	for _, d := range []map[string]any{decodeDoc(t, enc.stdout), decodeDoc(t, app.stdout)} {
		for k, v := range d {
			have[k] = true
			desc, ok := rows[k]
			if !ok {
				t.Errorf("field %q has no row in the README's table", k)
			}
			for _, n := range nestedKeys(v) {
				if !strings.Contains(desc, "`"+n+"`") {
					t.Errorf("field %s.%s is not named in its README row: %s", k, n, desc)
				}
			}
		}
	}
	for k := range rows {
		if !have[k] {
			t.Errorf("the README lists %q, which no document has", k)
		}
	}
}

// nestedKeys returns the keys of the objects within v, at any depth.
func nestedKeys(v any) []string {
	var out []string
	switch x := v.(type) {
	case map[string]any:
		for k, e := range x {
			out = append(out, k)
			out = append(out, nestedKeys(e)...)
		}
	case []any:
		for _, e := range x {
			out = append(out, nestedKeys(e)...)
		}
	}
	return out
}

// TestStrayClasses: a class is flagged as perhaps a stray value only where
// it may have turned a binary target into a multi-class one: a tiny class
// beside much larger ones of a target of three classes or more; not the
// rare positive class of a binary target, nor the classes of a small table.
func TestStrayClasses(t *testing.T) {
	cases := []struct {
		name   string
		counts map[string]int // rows of each class
		stray  []string
	}{
		{"a stray value", map[string]int{"0": 70, "1": 30, "maybe": 1}, []string{"maybe"}},
		{"two stray values", map[string]int{"0": 700, "1": 300, "maybe": 2, "n/a": 1}, []string{"maybe", "n/a"}},
		{"a small table", map[string]int{"0": 2, "1": 2}, nil},
		{"a small three-class table", map[string]int{"a": 3, "b": 2, "c": 1}, nil},
		{"a rare positive class", map[string]int{"0": 9995, "1": 5}, nil},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			dir := t.TempDir()
			var b strings.Builder
			b.WriteString("route,y\n")
			i := 0
			for _, class := range slices.Sorted(maps.Keys(c.counts)) {
				for range c.counts[class] {
					fmt.Fprintf(&b, "R%d,%s\n", i%7, class)
					i++
				}
			}
			in := writeFile(t, dir, "s.csv", b.String())
			res := mustRun(t, "encode", in, "--target", "y", "--columns", "route", "--folds", "2", "--json", "--out", filepath.Join(dir, "o.csv"), "--tables", filepath.Join(dir, "t"))
			var doc struct {
				Classes []struct {
					Class string `json:"class"`
					Rows  int    `json:"rows"`
					Stray bool   `json:"stray"`
				} `json:"classes"`
			}
			if err := json.Unmarshal([]byte(res.stdout), &doc); err != nil {
				t.Fatal(err)
			}
			var stray []string
			for _, cl := range doc.Classes {
				if cl.Rows != c.counts[cl.Class] {
					t.Errorf("class %s: %d rows, want %d", cl.Class, cl.Rows, c.counts[cl.Class])
				}
				if cl.Stray {
					stray = append(stray, cl.Class)
				}
			}
			slices.Sort(stray)
			if len(doc.Classes) != len(c.counts) || !slices.Equal(stray, c.stray) {
				t.Errorf("classes %+v: stray %v, want %v", doc.Classes, stray, c.stray)
			}
			if got := strings.Count(res.stderr, "a stray value?"); got != len(c.stray) {
				t.Errorf("summary flags %d classes, want %d: %s", got, len(c.stray), res.stderr)
			}
		})
	}
}
