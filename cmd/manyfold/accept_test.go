package main

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"testing"
)

// acceptCSV is a table of 600 shipments: two route parts, two destination
// columns and a delay in minutes that is larger on one pair of parts.
func acceptCSV() string {
	var b strings.Builder
	b.WriteString("route_from,route_to,dest_zone,dest_city,delay\n")
	for i := 0; i < 600; i++ {
		delay := (i * 7) % 31
		if i%4 == 1 && i%5 == 2 {
			delay += 20
		}
		b.WriteString("F" + strconv.Itoa(i%4) + ",T" + strconv.Itoa(i%5) + ",Z" + strconv.Itoa(i%3) + ",C" + strconv.Itoa(i%6) + "," + strconv.Itoa(delay) + "\n")
	}
	return b.String()
}

// TestComparePatterns: compare expands column patterns as scan and encode
// do: dest_* selects every dest_ column, !dest_city takes one out, a cross
// stays a cross, and the sections follow that order.
func TestComparePatterns(t *testing.T) {
	in := writeFile(t, t.TempDir(), "ship.csv", acceptCSV())
	res := mustRun(t, "compare", in, "--target", "delay>15", "--columns", "route_from*route_to,dest_*,!dest_city",
		"--candidates", "prior,target:eb", "--folds", "3", "--inner-folds", "2")
	var got []string
	for _, m := range regexp.MustCompile(`(?m)^== (\S+): \d+ levels ==$`).FindAllStringSubmatch(res.stdout, -1) {
		got = append(got, m[1])
	}
	if want := "route_from*route_to,dest_zone"; strings.Join(got, ",") != want {
		t.Errorf("compare's sections %v, want %s:\n%s", got, want, res.stdout)
	}
	all := mustRun(t, "compare", in, "--target", "delay>15", "--columns", "dest_*", "--candidates", "prior,target:eb", "--folds", "3", "--inner-folds", "2")
	if !strings.Contains(all.stdout, "== dest_zone: 3 levels ==") || !strings.Contains(all.stdout, "== dest_city: 6 levels ==") {
		t.Errorf("compare --columns dest_* lacks a dest_ column:\n%s", all.stdout)
	}
}

// TestDerivedTargetInApplyReport: tables fitted with a derived target
// (delay>15) on a cross are applied with --report to a file that holds the
// target's column: apply rebuilds the cross and the condition, and the
// report scores the cross's target mean by its AUC against the condition,
// recomputed here pair by pair from the output's values and the raw delays.
func TestDerivedTargetInApplyReport(t *testing.T) {
	dir := t.TempDir()
	in := writeFile(t, dir, "ship.csv", acceptCSV())
	tables, out, rp := filepath.Join(dir, "t"), filepath.Join(dir, "a.csv"), filepath.Join(dir, "r.json")
	mustRun(t, "encode", in, "--target", "delay>15", "--columns", "route_from*route_to", "--out", filepath.Join(dir, "o.csv"), "--tables", tables)
	mustRun(t, "apply", in, "--tables", tables, "--out", out, "--report", rp)
	data, err := os.ReadFile(rp)
	if err != nil {
		t.Fatal(err)
	}
	var rep struct {
		Target     string `json:"target"`
		Task       string `json:"task"`
		TargetRows int64  `json:"target_rows"`
		Columns    []struct {
			Column string `json:"column"`
			Levels int64  `json:"levels"`
			Score  *struct {
				Metric, Output string
				Rows           int64
				New            float64
			} `json:"score"`
		} `json:"columns"`
	}
	if err := json.Unmarshal(data, &rep); err != nil {
		t.Fatal(err)
	}
	if rep.Target != "delay>15" || rep.Task != "binary" || rep.TargetRows != 600 || len(rep.Columns) != 1 {
		t.Fatalf("report: target %q, task %q, %d target rows, %d columns; want delay>15, binary, 600, 1", rep.Target, rep.Task, rep.TargetRows, len(rep.Columns))
	}
	c := rep.Columns[0]
	if c.Column != "route_from*route_to" || c.Levels != 20 || c.Score == nil {
		t.Fatalf("report column %+v: want the cross, 20 levels, a score", c)
	}
	enc := readTable(t, out)
	var label []string
	for _, d := range enc.col(t, "delay") {
		if parseF(t, d) > 15 {
			label = append(label, "1")
		} else {
			label = append(label, "0")
		}
	}
	want := pairAUC(parseFloats(t, enc.col(t, "route_from*route_to_tmean")), label, "1")
	if s := c.Score; s.Metric != "auc" || s.Output != "route_from*route_to_tmean" || s.Rows != 600 || math.Abs(s.New-want) > 1e-12 {
		t.Errorf("score %+v; recomputed AUC %.17g over 600 rows", *s, want)
	}
}

// TestEncodePatternSelectsSeveral: a pattern that selects more columns
// than --columns has entries (dest_* selects dest_zone and dest_city)
// encodes each of them; encode validated the encodings against the list as
// written, before the pattern was expanded, and panicked.
func TestEncodePatternSelectsSeveral(t *testing.T) {
	dir := t.TempDir()
	in := writeFile(t, dir, "ship.csv", acceptCSV())
	for _, cols := range []string{"dest_*", "route_*,dest_zone", "*"} {
		out := filepath.Join(dir, "o.csv")
		res := runCLI(t, "encode", in, "--target", "delay>15", "--columns", cols, "--out", out, "--tables", filepath.Join(dir, "t"))
		if res.code != exitOK {
			t.Errorf("encode --columns %s: exit %d: %s", cols, res.code, res.stderr)
			continue
		}
		header := strings.Join(readCSVRows(t, out)[0], ",")
		for _, want := range []string{"dest_zone_tmean", "dest_city_tmean"} {
			if cols != "route_*,dest_zone" && !strings.Contains(header, want) {
				t.Errorf("encode --columns %s: header %s lacks %s", cols, header, want)
			}
		}
		// The column the target is computed from is never selected.
		if strings.Contains(header, "delay_") {
			t.Errorf("encode --columns %s under --target delay>15 encoded delay: %s", cols, header)
		}
	}
}

// TestDerivedTargetSourceNotSelected: under --target delay>15, a pattern
// never selects delay (compare scored it as a category and named it the
// winner at AUC 1), and scan marks delay as the target's.
func TestDerivedTargetSourceNotSelected(t *testing.T) {
	dir := t.TempDir()
	in := writeFile(t, dir, "ship.csv", acceptCSV())
	js := filepath.Join(dir, "c.json")
	res := runCLI(t, "compare", in, "--target", "delay>15", "--columns", "*", "--folds", "3", "--json", js)
	if res.code != exitOK {
		t.Fatalf("compare: exit %d: %s", res.code, res.stderr)
	}
	b, err := os.ReadFile(js)
	if err != nil {
		t.Fatal(err)
	}
	var doc struct {
		Columns []struct {
			Column string `json:"column"`
		} `json:"columns"`
	}
	if err := json.Unmarshal(b, &doc); err != nil {
		t.Fatal(err)
	}
	var names []string
	for _, c := range doc.Columns {
		names = append(names, c.Column)
	}
	if len(names) != 4 || slices.Contains(names, "delay") {
		t.Errorf("compare --columns '*' under delay>15 compared %v, want the four columns but delay", names)
	}
	res = runCLI(t, "scan", in, "--target", "delay>15")
	if res.code != exitOK {
		t.Fatalf("scan: exit %d: %s", res.code, res.stderr)
	}
	if !strings.Contains(res.stdout, "computed from") || strings.Contains(res.stdout, "delay=") {
		t.Errorf("scan does not mark delay as the target's column, or encodes it:\n%s", res.stdout)
	}
}
