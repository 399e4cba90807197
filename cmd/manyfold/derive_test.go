package main

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"manyfold/io/table"
	"manyfold/io/tableio"
)

// TestCrossOnFlights encodes the cross origin*destination of the open
// flights table (vega-datasets 3.2.1, fetched by testdata/fetch.sh) against
// the derived target delay>15, and checks the manifest's level count and
// every row's out-of-fold target mean and frequency against a
// recomputation in the test from the raw rows and the written folds: for a
// row of fold f and route (o, d), the m-estimate (s + m p)/(n + m), m = 20,
// n and s the route's rows and late rows outside fold f, p the late share
// of all rows outside fold f; the frequency is the route's rows in the
// whole table. apply must then give each row the full-data value.
func TestCrossOnFlights(t *testing.T) {
	if testing.Short() {
		t.Skip("3 million rows")
	}
	path := openData(t, "flights-3m.parquet")
	dir := t.TempDir()
	out, tables, app := filepath.Join(dir, "enc.parquet"), filepath.Join(dir, "t"), filepath.Join(dir, "app.parquet")
	mustRun(t, "encode", path, "--target", "delay>15", "--columns", "origin*destination", "--methods", "target:m=20+freq",
		"--fold-column", "fold", "--seed", "5", "--keep", "origin,destination,delay", "--out", out, "--tables", tables)
	mustRun(t, "apply", path, "--tables", tables, "--out", app)

	type agg struct{ n, s float64 }
	route := func(o, d string) string { return o + "\x00" + d }
	var keys []string
	var late []float64
	var folds []int
	var tm, fq []float64
	readAll(t, out, func(b *table.Batch, at map[string]int) {
		for i := 0; i < b.Rows; i++ {
			o := string(b.Cols[at["origin"]].Bytes(i))
			d := string(b.Cols[at["destination"]].Bytes(i))
			delay, _, _ := b.Cols[at["delay"]].Float(i)
			y := 0.0
			if delay > 15 {
				y = 1
			}
			f, _, _ := b.Cols[at["fold"]].Float(i)
			v, _, _ := b.Cols[at["origin*destination_tmean"]].Float(i)
			c, _, _ := b.Cols[at["origin*destination_freq"]].Float(i)
			keys, late, folds, tm, fq = append(keys, route(o, d)), append(late, y), append(folds, int(f)), append(tm, v), append(fq, c)
		}
	})
	const k, m = 5, 20.0
	all := map[string]*agg{}
	byFold := make([]map[string]*agg, k)
	var totals [k]agg
	var total agg
	for f := range byFold {
		byFold[f] = map[string]*agg{}
	}
	for i, key := range keys {
		for _, mp := range []map[string]*agg{all, byFold[folds[i]]} {
			a := mp[key]
			if a == nil {
				a = &agg{}
				mp[key] = a
			}
			a.n++
			a.s += late[i]
		}
		totals[folds[i]].n++
		totals[folds[i]].s += late[i]
		total.n++
		total.s += late[i]
	}
	var mf struct {
		Columns []struct {
			Levels int `json:"levels"`
		} `json:"columns"`
	}
	b, err := os.ReadFile(filepath.Join(tables, "manifest.json"))
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(b, &mf); err != nil {
		t.Fatal(err)
	}
	if len(mf.Columns) != 1 || mf.Columns[0].Levels != len(all) {
		t.Fatalf("manifest: %+v; the table has %d routes", mf.Columns, len(all))
	}
	for i, key := range keys {
		f := folds[i]
		a, in := all[key], byFold[f][key]
		n, s := a.n, a.s
		if in != nil {
			n, s = n-in.n, s-in.s
		}
		p := (total.s - totals[f].s) / (total.n - totals[f].n)
		want := (s + m*p) / (n + m)
		if math.Abs(tm[i]-want) > 1e-12 || fq[i] != a.n {
			t.Fatalf("row %d (%q, fold %d): tmean %v freq %v; recomputed %v, %v", i, key, f, tm[i], fq[i], want, a.n)
		}
	}
	// apply: the full-data value, the same rows in the same order.
	row := 0
	p := total.s / total.n
	readAll(t, app, func(b *table.Batch, at map[string]int) {
		for i := 0; i < b.Rows; i++ {
			a := all[keys[row]]
			v, _, _ := b.Cols[at["origin*destination_tmean"]].Float(i)
			if want := (a.s + m*p) / (a.n + m); math.Abs(v-want) > 1e-12 {
				t.Fatalf("apply, row %d: %v, recomputed %v", row, v, want)
			}
			row++
		}
	})
	if row != len(keys) {
		t.Fatalf("apply wrote %d rows of %d", row, len(keys))
	}
	t.Logf("%d rows, %d routes, late share %.4f", len(keys), len(all), p)
}

// readAll calls fn with every batch of the table at path and the position
// of each column by name.
func readAll(t *testing.T, path string, fn func(b *table.Batch, at map[string]int)) {
	t.Helper()
	r, err := tableio.Open(path, tableio.ReadOptions{})
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	at := map[string]int{}
	for i, f := range r.Schema().Fields {
		at[f.Name] = i
	}
	if err := table.ForEach(r, func(b *table.Batch) error { fn(b, at); return nil }); err != nil {
		t.Fatal(err)
	}
}

// TestDerivedColumnsEverywhere: a cross, a condition target and column
// patterns work in scan, encode, apply and compare, and the derived
// columns are not written back as input columns.
func TestDerivedColumnsEverywhere(t *testing.T) {
	dir := t.TempDir()
	var b strings.Builder
	b.WriteString("route_from,route_to,dest_zone,dest_city,delay\n")
	for i := 0; i < 400; i++ {
		from, to := "F"+strconv.Itoa(i%4), "T"+strconv.Itoa(i%5)
		delay := (i * 7) % 31
		if (i%4 == 1) && (i%5 == 2) {
			delay += 20
		}
		b.WriteString(from + "," + to + ",Z" + strconv.Itoa(i%3) + ",C" + strconv.Itoa(i%6) + "," + strconv.Itoa(delay) + "\n")
	}
	in := writeFile(t, dir, "ship.csv", b.String())
	scan := mustRun(t, "scan", in, "--columns", "route_from*route_to,dest_*,!dest_city", "--target", "delay>15", "--json")
	var sc struct {
		Columns []struct {
			Name     string `json:"name"`
			Distinct int    `json:"distinct"`
		} `json:"columns"`
	}
	if err := json.Unmarshal([]byte(scan.stdout), &sc); err != nil {
		t.Fatal(err)
	}
	if len(sc.Columns) != 2 || sc.Columns[0].Name != "route_from*route_to" || sc.Columns[0].Distinct != 20 || sc.Columns[1].Name != "dest_zone" {
		t.Fatalf("scan: %+v (want the cross with its 20 pairs, then dest_zone; dest_city excluded)", sc.Columns)
	}
	res := mustRun(t, "encode", in, "--target", "delay>15", "--columns", "route_from*route_to,dest_*,!dest_city", "--out", filepath.Join(dir, "o.csv"), "--tables", filepath.Join(dir, "t"))
	if !strings.Contains(res.stderr, "target delay>15: binary, positive class 1") {
		t.Errorf("summary: %s", res.stderr)
	}
	enc := readCSVRows(t, filepath.Join(dir, "o.csv"))
	want := "route_from,route_to,dest_zone,dest_city,delay,route_from*route_to_tmean,dest_zone_tmean"
	if got := strings.Join(enc[0], ","); got != want {
		t.Errorf("header %s, want %s", got, want)
	}
	mustRun(t, "apply", in, "--tables", filepath.Join(dir, "t"), "--out", filepath.Join(dir, "a.csv"))
	if got := strings.Join(readCSVRows(t, filepath.Join(dir, "a.csv"))[0], ","); got != want {
		t.Errorf("apply header %s, want %s", got, want)
	}
	cmp := mustRun(t, "compare", in, "--target", "delay>15", "--columns", "route_from*route_to,dest_zone", "--candidates", "prior,target:eb", "--folds", "3", "--inner-folds", "2")
	if !strings.Contains(cmp.stdout, "== route_from*route_to: 20 levels ==") {
		t.Errorf("compare:\n%s", cmp.stdout)
	}
	// A cross of a missing column, and a text compared with >, are usage
	// errors.
	for _, args := range [][]string{
		{"encode", in, "--target", "delay>15", "--columns", "route_from*nowhere", "--out", filepath.Join(dir, "x.csv"), "--tables", filepath.Join(dir, "x")},
		{"encode", in, "--target", "delay>soon", "--columns", "dest_zone", "--out", filepath.Join(dir, "x.csv"), "--tables", filepath.Join(dir, "x")},
		{"encode", in, "--target", "delay>15", "--columns", "nothing_*", "--out", filepath.Join(dir, "x.csv"), "--tables", filepath.Join(dir, "x")},
	} {
		if r := runCLI(t, args...); r.code != exitUsage {
			t.Errorf("%v: exit %d, want %d: %s", args, r.code, exitUsage, r.stderr)
		}
	}
}

// TestWarnings: encode warns of a hash with far too few buckets (the
// chance that a level shares its bucket, 1-(1-1/B)^(n-1), is 0.99 for 300
// levels in 64 buckets), of a target mean on a column of singletons
// without a minimum of rows or a hierarchy, and of a numeric column with
// more than 1000 distinct values encoded as categories; and is silent
// where none applies.
func TestWarnings(t *testing.T) {
	dir := t.TempDir()
	var b strings.Builder
	b.WriteString("account,weight,zone,late\n")
	for i := 0; i < 1500; i++ {
		b.WriteString("A" + strconv.Itoa(i) + "," + strconv.Itoa(i*7) + ",Z" + strconv.Itoa(i%300) + "," + strconv.Itoa(i%2) + "\n")
	}
	in := writeFile(t, dir, "w.csv", b.String())
	res := mustRun(t, "encode", in, "--target", "late", "--methods", "account=target:eb,weight=freq,zone=hash:64", "--out", filepath.Join(dir, "o.csv"), "--tables", filepath.Join(dir, "t"))
	for _, want := range []string{
		`warning: column "account": target:eb: 100% of its 1500 levels are seen once`,
		`warning: column "weight" is int with 1500 distinct values, encoded as categories`,
		`warning: column "zone": hash:64: 300 levels in 64 buckets, a level shares its bucket with probability 0.99`,
	} {
		if !strings.Contains(res.stderr, want) {
			t.Errorf("stderr lacks %q:\n%s", want, res.stderr)
		}
	}
	quiet := mustRun(t, "encode", in, "--target", "late", "--methods", "zone=target:eb+hash:4096", "--out", filepath.Join(dir, "o2.csv"), "--tables", filepath.Join(dir, "t2"))
	if strings.Contains(quiet.stderr, "warning:") {
		t.Errorf("a warning where none applies:\n%s", quiet.stderr)
	}
}

// TestCompareSamplesUnderDerivedColumns: --sample bounds the model rows of
// a Parquet input with a derived target and a cross as it does with plain
// columns (the derived reader hid the file's row count, and every row went
// to the models).
func TestCompareSamplesUnderDerivedColumns(t *testing.T) {
	dir := t.TempDir()
	mustRun(t, "demo", "--rows", "6000", "--dir", dir)
	for _, c := range [][]string{{"late", "route", "shipments.parquet"}, {"cost>20", "route*parcel_type", "shipments.parquet"}, {"cost>20", "route*parcel_type", "shipments.csv"}} {
		in := filepath.Join(dir, c[2])
		if c[2] == "shipments.csv" {
			mustRun(t, "encode", filepath.Join(dir, "shipments.parquet"), "--target", "late", "--columns", "route", "--out", in, "--tables", filepath.Join(dir, "t"))
		}
		js := filepath.Join(dir, "c.json")
		mustRun(t, "compare", in, "--target", c[0], "--columns", c[1], "--candidates", "prior,target:eb", "--folds", "3", "--inner-folds", "2", "--sample", "2000", "--json", js)
		var res struct {
			Rows      int64 `json:"rows"`
			ModelRows int64 `json:"model_rows"`
		}
		data, err := os.ReadFile(js)
		if err != nil {
			t.Fatal(err)
		}
		if err := json.Unmarshal(data, &res); err != nil {
			t.Fatal(err)
		}
		if res.Rows != 6000 || res.ModelRows < 1600 || res.ModelRows > 2400 {
			t.Errorf("%s --target %s --columns %s: %d rows, %d model rows; want 6000 and about 2000", c[2], c[0], c[1], res.Rows, res.ModelRows)
		}
	}
}
