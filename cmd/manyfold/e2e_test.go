package main

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"slices"
	"strconv"
	"strings"
	"testing"

	"github.com/parquet-go/parquet-go"
	"github.com/parquet-go/parquet-go/format"

	"manyfold/folds"
	"manyfold/io/pqio"
	"manyfold/io/table"
	"manyfold/io/tableio"
)

// encodedNames returns the names of the columns encode added to tt (those
// after the input's columns).
func encodedNames(tt *textTable, inputCols int) []string { return tt.names[inputCols:] }

// withNullPostcodes blanks the postcode of every 9th row of a shipments CSV.
func withNullPostcodes(csv string) string {
	lines := strings.Split(csv, "\n")
	for i := 1; i < len(lines); i++ {
		if i%9 == 0 && lines[i] != "" {
			_, rest, _ := strings.Cut(lines[i], ",")
			lines[i] = "," + rest
		}
	}
	return strings.Join(lines, "\n")
}

// TestApplyOnTrainingMatchesSchemeNone: with --scheme none a training row
// is encoded in-sample, exactly as apply encodes a new row, so applying the
// tables to the training file gives the encoded table's values.
func TestApplyOnTrainingMatchesSchemeNone(t *testing.T) {
	cases := []struct {
		name, target, columns, methods string
		flags                          []string
	}{
		{"binary", "late", "postcode,sender,route", "target:m=2+freq+topk+hash", nil},
		{"binary left-out levels", "late", "postcode,sender,route", "target:eb+freq+topk:4+hash:signed", []string{"--min-level-rows", "8"}},
		{"nulls unseen", "late", "postcode,sender", "target:eb+freq:share+topk+hash", []string{"--nulls", "unseen"}},
		{"regression", "cost", "postcode,sender,route", "target:eb+freq+topk+hash", nil},
		{"multiclass", "parcel_type", "postcode,sender", "target:blend=3,1.5+freq+topk+hash", nil},
		{"hierarchical prior", "late", "route", "target:eb:prior=prefix2+freq+topk+hash", nil},
		{"prior by column", "late", "postcode,sender", "target:m=3:prior=column:route+freq+topk+hash", nil},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			dir := t.TempDir()
			train := writeFile(t, dir, "shipments.csv", withNullPostcodes(shipmentsCSV(300)))
			enc := filepath.Join(dir, "enc.csv")
			tables := filepath.Join(dir, "tables")
			args := append([]string{"encode", train, "--target", c.target, "--columns", c.columns,
				"--methods", c.methods, "--scheme", "none", "--out", enc, "--tables", tables}, c.flags...)
			mustRun(t, args...)
			app := filepath.Join(dir, "applied.parquet")
			res := mustRun(t, "apply", train, "--tables", tables, "--out", app)
			if !strings.Contains(res.stderr, "applied "+tables+" to 300 rows") {
				t.Errorf("apply summary %q", res.stderr)
			}
			e, a := readTable(t, enc), readTable(t, app)
			if !slices.Equal(e.names, a.names) {
				t.Fatalf("encode wrote %v, apply %v", e.names, a.names)
			}
			names := encodedNames(e, 6)
			if len(names) < 4 {
				t.Fatalf("only %v encoded", names)
			}
			for _, n := range names {
				ec, ac := e.col(t, n), a.col(t, n)
				for i := range ec {
					if ec[i] != ac[i] {
						t.Errorf("%s row %d: encode %s, apply %s", n, i+1, ec[i], ac[i])
						break
					}
				}
			}
		})
	}
}

// shipmentBatches returns the same shipments as two batches: text
// postcode (with nulls), sender and route, integer late.
func shipmentBatches() (*table.Schema, []*table.Batch) {
	s := &table.Schema{Fields: []table.Field{
		{Name: "postcode", Kind: table.String, Nullable: true},
		{Name: "sender", Kind: table.String, Nullable: true},
		{Name: "route", Kind: table.String, Nullable: true},
		{Name: "late", Kind: table.Int64, Nullable: true},
	}}
	var out []*table.Batch
	first := int64(1)
	for _, n := range []int{170, 130} {
		var pc, snd, rt []string
		var late []int64
		for j := 0; j < n; j++ {
			i := int(first) - 1 + j
			p := fmt.Sprintf("PC%03d", (i*7)%29)
			if i%11 == 5 {
				p = nullCell
			}
			pc = append(pc, p)
			snd = append(snd, fmt.Sprintf("ACC-%d", (i*i+3)%13))
			rt = append(rt, fmt.Sprintf("R%d-%d", i%4, (i/3)%5))
			late = append(late, int64((i*13+i/5)%3%2))
		}
		out = append(out, &table.Batch{Rows: n, FirstRow: first,
			Cols: []table.Column{textColumn(pc), textColumn(snd), textColumn(rt), intColumn(late)}})
		first += int64(n)
	}
	return s, out
}

// compareTablesDirs checks that two tables directories hold the same
// files, the same Parquet tables cell by cell, and manifests equal but for
// the keys in skip (top-level keys, or "columns.KEY" for a key of every
// column).
func compareTablesDirs(t *testing.T, a, b string, skip ...string) {
	t.Helper()
	ea, eb := dirEntries(t, a), dirEntries(t, b)
	if !slices.Equal(ea, eb) {
		t.Fatalf("%s holds %v, %s holds %v", a, ea, b, eb)
	}
	for _, name := range ea {
		if !strings.HasSuffix(name, ".parquet") {
			continue
		}
		ta, tb := readTable(t, filepath.Join(a, name)), readTable(t, filepath.Join(b, name))
		if !slices.Equal(ta.names, tb.names) {
			t.Errorf("%s: columns %v and %v", name, ta.names, tb.names)
			continue
		}
		if len(ta.rows) != len(tb.rows) {
			t.Errorf("%s: %d rows and %d", name, len(ta.rows), len(tb.rows))
			continue
		}
		bad := 0
		for i := range ta.rows {
			for j := range ta.rows[i] {
				if ta.rows[i][j] != tb.rows[i][j] && bad < 5 {
					bad++
					t.Errorf("%s row %d column %s: %s and %s", name, i+1, ta.names[j], ta.rows[i][j], tb.rows[i][j])
				}
			}
		}
	}
	ma, mb := readManifest(t, a), readManifest(t, b)
	for _, k := range skip {
		delete(ma, k)
		delete(mb, k)
		if ck, ok := strings.CutPrefix(k, "columns."); ok {
			for _, m := range []map[string]any{ma, mb} {
				cols, _ := m["columns"].([]any)
				for _, c := range cols {
					delete(c.(map[string]any), ck)
				}
			}
		}
	}
	for k := range ma {
		if !reflect.DeepEqual(ma[k], mb[k]) {
			ja, _ := json.Marshal(ma[k])
			jb, _ := json.Marshal(mb[k])
			t.Errorf("manifest %q differs:\n%s\n%s", k, ja, jb)
		}
	}
	for k := range mb {
		if _, ok := ma[k]; !ok {
			t.Errorf("manifest %q only in %s", k, b)
		}
	}
}

func readManifest(t *testing.T, dir string) map[string]any {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(dir, "manifest.json"))
	if err != nil {
		t.Fatal(err)
	}
	var m map[string]any
	if err := json.Unmarshal(b, &m); err != nil {
		t.Fatal(err)
	}
	return m
}

// TestCSVAndParquetSameTables: the same rows as CSV, as Parquet and as
// Arrow IPC give the same mapping tables, manifest and encoded values.
func TestCSVAndParquetSameTables(t *testing.T) {
	dir := t.TempDir()
	s, batches := shipmentBatches()
	var tables, outs []string
	for _, ext := range []string{"csv", "parquet", "arrow"} {
		in := filepath.Join(dir, "shipments."+ext)
		writeTable(t, in, s, batches...)
		out := filepath.Join(dir, "enc-"+ext+".csv")
		tab := filepath.Join(dir, "tables-"+ext)
		mustRun(t, "encode", in, "--target", "late", "--columns", "postcode,sender,route",
			"--methods", "target:eb+freq+topk:6+hash", "--folds", "3", "--seed", "4",
			"--fold-column", "fold", "--out", out, "--tables", tab)
		tables, outs = append(tables, tab), append(outs, out)
	}
	// Nothing differs, not even the input's types: the CSV reader infers
	// text for the postcodes and int for late, as the Parquet file declares.
	// Arrow input is held to the same standard.
	for i := 1; i < len(tables); i++ {
		compareTablesDirs(t, tables[0], tables[i])
		oc, op := readTable(t, outs[0]), readTable(t, outs[i])
		if !reflect.DeepEqual(oc.rows, op.rows) || !slices.Equal(oc.names, op.names) {
			t.Errorf("encoded tables differ between %s and %s", outs[0], outs[i])
		}
	}
	if n := len(readTable(t, outs[0]).rows); n != 300 {
		t.Errorf("%d rows encoded, want 300", n)
	}
}

// TestShardMerge: tables fitted on the two halves of a file and merged
// equal the tables fitted on the whole file, byte for byte, for the
// regression target cost too (its sums are exact until rounded, and the
// halves' sums are taken about their own first values).
func TestShardMerge(t *testing.T) {
	whole := decimalCosts(withNullPostcodes(shipmentsCSV(301)))
	lines := strings.SplitAfter(whole, "\n")
	header, body := lines[0], lines[1:]
	half := len(body) / 2
	const rest = "+freq+topk:5+hash"
	plans := []struct{ name, columns, methods, target string }{
		{"eb", "postcode,sender,route", "target:eb" + rest, ""},
		{"eb cost", "postcode,sender,route", "target:eb" + rest, "cost"},
		{"m=3 prior=prefix2 cost", "postcode,sender,route", "target:m=3:prior=prefix2" + rest, "cost"},
		{"eb prior=column:route cost", "", "postcode=target:eb:prior=column:route" + rest + ",route=target:eb" + rest, "cost"},
		{"m=3", "postcode,sender,route", "target:m=3" + rest, ""},
		{"blend=2,1", "postcode,sender,route", "target:blend=2,1" + rest, ""},
		// route cannot be its own prior: a list per column.
		{"eb prior=column:route", "", "postcode=target:eb:prior=column:route" + rest +
			",sender=target:eb:prior=column:route" + rest + ",route=target:eb" + rest, ""},
		{"m=3 prior=prefix2", "postcode,sender,route", "target:m=3:prior=prefix2" + rest, ""},
	}
	for _, scheme := range []string{"none", "kfold"} {
		for _, plan := range plans {
			t.Run(scheme+" "+plan.name, func(t *testing.T) {
				dir := t.TempDir()
				files := map[string]string{
					"a.csv":     header + strings.Join(body[:half], ""),
					"b.csv":     header + strings.Join(body[half:], ""),
					"whole.csv": whole,
				}
				for name, text := range files {
					writeFile(t, dir, name, text)
					target := "late"
					if plan.target != "" {
						target = plan.target
					}
					flags := []string{"encode", filepath.Join(dir, name), "--target", target,
						"--methods", plan.methods, "--scheme", scheme, "--folds", "3",
						"--out", filepath.Join(dir, name+".enc.csv"), "--tables", filepath.Join(dir, "tables-"+name)}
					if plan.columns != "" {
						flags = append(flags, "--columns", plan.columns)
					}
					mustRun(t, flags...)
				}
				merged := filepath.Join(dir, "merged")
				res := mustRun(t, "merge", filepath.Join(dir, "tables-a.csv"), filepath.Join(dir, "tables-b.csv"), "--tables", merged)
				if !strings.Contains(res.stderr, "merged 2 tables directories (301 rows)") {
					t.Errorf("merge summary %q", res.stderr)
				}
				// A merge has no training pass, hence no training score.
				compareTablesDirs(t, merged, filepath.Join(dir, "tables-whole.csv"), "columns.training_score")
			})
		}
	}
}

// decimalCosts gives every row's cost (the last field) cents that are not
// a sum of powers of two, so that floating-point sums of them depend on
// their order: 2.5 becomes 2.5 * 1.1 + 0.01 * row.
func decimalCosts(csv string) string {
	lines := strings.SplitAfter(csv, "\n")
	for i := 1; i < len(lines); i++ {
		line := strings.TrimSuffix(lines[i], "\n")
		j := strings.LastIndexByte(line, ',')
		if j < 0 {
			continue
		}
		v, err := strconv.ParseFloat(line[j+1:], 64)
		if err != nil {
			continue
		}
		lines[i] = line[:j+1] + strconv.FormatFloat(math.Round((v*1.1+0.01*float64(i))*100)/100, 'f', -1, 64) + "\n"
	}
	return strings.Join(lines, "")
}

// TestMergeMismatch: tables fitted with other parameters, on other
// columns, or without their small levels do not merge (exit 6), and no
// merged tables are left.
func TestMergeMismatch(t *testing.T) {
	cases := []struct {
		name   string
		second []string // flags of the second shard; the first has --columns postcode --methods target:m=1
		want   string
	}{
		{"other smoothing", []string{"--columns", "postcode", "--methods", "target:m=2"}, "same parameters"},
		{"other columns", []string{"--columns", "sender", "--methods", "target:m=1"}, "same parameters"},
		{"small levels left out", []string{"--columns", "postcode", "--methods", "target:m=1", "--min-level-rows", "3"}, "--min-level-rows 0"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			dir := t.TempDir()
			in := writeFile(t, dir, "shipments.csv", shipmentsCSV(50))
			for i, flags := range [][]string{{"--columns", "postcode", "--methods", "target:m=1"}, c.second} {
				args := append([]string{"encode", in, "--target", "late",
					"--out", filepath.Join(dir, fmt.Sprintf("e%d.csv", i)), "--tables", filepath.Join(dir, fmt.Sprintf("t%d", i))}, flags...)
				mustRun(t, args...)
			}
			res := runCLI(t, "merge", filepath.Join(dir, "t0"), filepath.Join(dir, "t1"), "--tables", filepath.Join(dir, "m"))
			if res.code != exitMismatch || !strings.Contains(res.stderr, filepath.Join(dir, "t1")) || !strings.Contains(res.stderr, c.want) {
				t.Errorf("exit %d, stderr %q; want %d naming t1 and %q", res.code, res.stderr, exitMismatch, c.want)
			}
			if _, err := os.Stat(filepath.Join(dir, "m")); err == nil {
				t.Errorf("merge left a tables directory behind")
			}
		})
	}
}

// TestDeterministic: the same encode twice gives byte-identical outputs
// and tables, in every output format.
func TestDeterministic(t *testing.T) {
	for _, ext := range []string{"csv", "parquet", "arrow"} {
		t.Run(ext, func(t *testing.T) {
			dir := t.TempDir()
			in := writeFile(t, dir, "shipments.csv", withNullPostcodes(shipmentsCSV(400)))
			var snaps []map[string][]byte
			// Two runs with the same flags: one column at a time, then
			// three at once; the bytes must not depend on the threads.
			for run, threads := range []string{"1", "3"} {
				d := filepath.Join(dir, fmt.Sprint(run))
				if err := os.Mkdir(d, 0o755); err != nil {
					t.Fatal(err)
				}
				mustRun(t, "encode", in, "--target", "late", "--columns", "postcode,sender,route",
					"--methods", "target:eb+freq+topk+hash", "--fold-column", "fold", "--seed", "11", "--threads", threads,
					"--out", filepath.Join(d, "enc."+ext), "--tables", filepath.Join(d, "tables"))
				mustRun(t, "apply", in, "--tables", filepath.Join(d, "tables"), "--out", filepath.Join(d, "app."+ext), "--threads", threads)
				s := map[string][]byte{}
				for p, b := range snapshot(t, d) {
					rel, _ := filepath.Rel(d, p)
					s[rel] = b
				}
				snaps = append(snaps, s)
			}
			if len(snaps[0]) != len(snaps[1]) || len(snaps[0]) < 5 {
				t.Fatalf("runs wrote %d and %d files", len(snaps[0]), len(snaps[1]))
			}
			for name, b := range snaps[0] {
				if !bytes.Equal(b, snaps[1][name]) {
					t.Errorf("%s differs between two identical runs", name)
				}
			}
		})
	}
}

// foldKeys returns two group keys that folds.Key puts in fold 0 and fold 1
// of 2 with seed 0, found by search.
func foldKeys(t *testing.T) [2]string {
	var keys [2]string
	for i := 0; i < 100 && (keys[0] == "" || keys[1] == ""); i++ {
		k := fmt.Sprintf("ACC-%d", i)
		if f := folds.Key(0, []byte(k), 2); keys[f] == "" {
			keys[f] = k
		}
	}
	if keys[0] == "" || keys[1] == "" {
		t.Fatal("no keys found for both folds")
	}
	return keys
}

// TestOutOfFoldWorkedExample checks k-fold out-of-fold values against the
// worked example computed from the m-estimate formula (Cestnik, ECAI 1990:
// (s + m*p)/(n + m)) under the protocol of Pargent et al., Computational
// Statistics 37(5), 2022 (a training row is encoded with statistics of the
// other folds, the prior being the mean of those rows). Rows (route, late):
// A1 A1 A0 A1 B0 B0 B1 B0 in folds 0 1 0 1 0 1 0 1, m=1: fold-0 rows get
// A -> 5/6, B -> 1/6; fold-1 rows get A -> 0.5, B -> 0.5 (computed from
// the formula).
func TestOutOfFoldWorkedExample(t *testing.T) {
	keys := foldKeys(t)
	route := []string{"A", "A", "A", "A", "B", "B", "B", "B"}
	late := []int{1, 1, 0, 1, 0, 0, 1, 0}
	var b strings.Builder
	b.WriteString("route,sender,late\n")
	for i := range route {
		fmt.Fprintf(&b, "R-%s,%s,%d\n", route[i], keys[i%2], late[i])
	}
	dir := t.TempDir()
	in := writeFile(t, dir, "shipments.csv", b.String())
	out := filepath.Join(dir, "enc.csv")
	mustRun(t, "encode", in, "--target", "late", "--columns", "route", "--fold-by", "group=sender", "--folds", "2",
		"--methods", "target:m=1", "--fold-column", "fold", "--out", out, "--tables", filepath.Join(dir, "tables"))
	tt := readTable(t, out)
	fold := tt.col(t, "fold")
	got := tt.col(t, "route_tmean")
	want := []float64{5.0 / 6, 0.5, 5.0 / 6, 0.5, 1.0 / 6, 0.5, 1.0 / 6, 0.5}
	for i := range want {
		if fold[i] != fmt.Sprint(i%2) {
			t.Errorf("row %d in fold %s, want %d", i+1, fold[i], i%2)
		}
		if v := parseF(t, got[i]); !near(v, want[i], 1e-12) {
			t.Errorf("row %d: route_tmean %.15g, want %.15g", i+1, v, want[i])
		}
	}
}

// TestOrderedScheme checks the ordered target statistic (Prokhorenkova et
// al., NeurIPS 2018): a row is encoded from the rows before it only,
// (s_before + a*p)/(n_before + a). One level, y = [1,0,1,1] in file order,
// a=1. manyfold's prior is the mean of all rows, p = 0.75, so the values
// are computed from the formula with p = 0.75: [0.75, 1.75/2, 1.75/3,
// 2.75/4]; the reference check [0.5, 0.75, 0.5, 0.625] uses p = 0.5. A new
// row of the level (apply) gets (3 + 0.75)/(4 + 1) = 0.75 (computed from
// the formula).
func TestOrderedScheme(t *testing.T) {
	dir := t.TempDir()
	in := writeFile(t, dir, "shipments.csv", "route,late\nR1,1\nR1,0\nR1,1\nR1,1\n")
	out := filepath.Join(dir, "enc.csv")
	tables := filepath.Join(dir, "tables")
	mustRun(t, "encode", in, "--target", "late", "--columns", "route", "--scheme", "ordered", "--methods", "target:m=1",
		"--out", out, "--tables", tables)
	const p = 0.75
	want := []float64{(0 + p) / 1, (1 + p) / 2, (1 + p) / 3, (2 + p) / 4}
	got := readTable(t, out).col(t, "route_tmean")
	for i := range want {
		if v := parseF(t, got[i]); !near(v, want[i], 1e-12) {
			t.Errorf("row %d: route_tmean %.15g, want %.15g", i+1, v, want[i])
		}
	}
	app := filepath.Join(dir, "app.csv")
	mustRun(t, "apply", in, "--tables", tables, "--out", app)
	for i, s := range readTable(t, app).col(t, "route_tmean") {
		if v := parseF(t, s); !near(v, (3+p)/5, 1e-12) {
			t.Errorf("applied row %d: %.15g, want %.15g", i+1, v, (3+p)/5)
		}
	}
}

// TestLeaveOneOutLeaks checks leave-one-out values and their leak
// (Prokhorenkova et al., NeurIPS 2018): on a constant column of n = 101
// rows with 50 positives, (n+ - y_i + a*p)/(n - 1 + a) with a = 1 gives
// positive rows (49 + p)/101 and negative rows (50 + p)/101, p = 50/101
// the prior of all rows (computed from the formula; the reference check
// uses p = 0.5: 49.5/101 and 50.5/101). One threshold separates the labels.
func TestLeaveOneOutLeaks(t *testing.T) {
	var b strings.Builder
	b.WriteString("parcel_type,late\n")
	late := make([]int, 101)
	for i := range late {
		if i%2 == 1 || i == 100 {
			late[i] = 0
		} else {
			late[i] = 1
		}
	}
	pos := 0
	for _, y := range late {
		pos += y
		fmt.Fprintf(&b, "bulky,%d\n", y)
	}
	if pos != 50 {
		t.Fatalf("%d positives, want 50", pos)
	}
	dir := t.TempDir()
	in := writeFile(t, dir, "shipments.csv", b.String())
	out := filepath.Join(dir, "enc.csv")
	mustRun(t, "encode", in, "--target", "late", "--columns", "parcel_type", "--scheme", "loo", "--methods", "target:m=1",
		"--out", out, "--tables", filepath.Join(dir, "tables"))
	const p = 50.0 / 101
	wantPos, wantNeg := (49+p)/101, (50+p)/101
	got := readTable(t, out).col(t, "parcel_type_tmean")
	maxPos, minNeg := 0.0, 1.0
	for i, s := range got {
		v := parseF(t, s)
		want := wantNeg
		if late[i] == 1 {
			want = wantPos
			maxPos = max(maxPos, v)
		} else {
			minNeg = min(minNeg, v)
		}
		if !near(v, want, 1e-12) {
			t.Errorf("row %d (late %d): %.15g, want %.15g", i+1, late[i], v, want)
		}
	}
	// The leak: every positive row is encoded below every negative one.
	if !(maxPos < minNeg) {
		t.Errorf("no threshold separates the labels: max positive %v, min negative %v", maxPos, minNeg)
	}
}

// TestReferenceChecksPriorHalf reproduces the reference's own check values,
// which take the prior p = 0.5: a second level is added so that the prior of
// all rows is exactly 0.5 (it does not change the first level's values).
//   - Ordered target statistic (Prokhorenkova et al., NeurIPS 2018; computed
//     from the formula): one level, y = [1,0,1,1] in order, a = 1, p = 0.5 ->
//     [0.5, 0.75, 0.5, 0.625]; a new row of that level -> 3.5/5 = 0.7.
//   - Leave-one-out (same paper; computed): n = 101, n+ = 50, a = 1, p = 0.5:
//     a positive row gets 49.5/101, a negative row 50.5/101.
func TestReferenceChecksPriorHalf(t *testing.T) {
	dir := t.TempDir()
	in := writeFile(t, dir, "ordered.csv", "route,late\nR1,1\nR1,0\nR1,1\nR1,1\nR2,0\nR2,0\n")
	out := filepath.Join(dir, "enc.csv")
	tables := filepath.Join(dir, "tables")
	mustRun(t, "encode", in, "--target", "late", "--columns", "route", "--scheme", "ordered", "--methods", "target:m=1",
		"--out", out, "--tables", tables)
	got := readTable(t, out).col(t, "route_tmean")
	for i, want := range []float64{0.5, 0.75, 0.5, 0.625} {
		if v := parseF(t, got[i]); !near(v, want, 1e-12) {
			t.Errorf("ordered row %d: %.15g, want %.15g", i+1, v, want)
		}
	}
	app := filepath.Join(dir, "app.csv")
	mustRun(t, "apply", in, "--tables", tables, "--out", app)
	if v := parseF(t, readTable(t, app).col(t, "route_tmean")[0]); !near(v, 0.7, 1e-12) {
		t.Errorf("new row of R1: %.15g, want 0.7", v)
	}

	var b strings.Builder
	b.WriteString("parcel_type,late\n")
	for i := 0; i < 101; i++ {
		fmt.Fprintf(&b, "bulky,%d\n", map[bool]int{true: 1, false: 0}[i < 50])
	}
	for i := 0; i < 101; i++ { // 51 positives, 50 negatives: the prior of all rows is 101/202
		fmt.Fprintf(&b, "flat,%d\n", map[bool]int{true: 1, false: 0}[i < 51])
	}
	in = writeFile(t, dir, "loo.csv", b.String())
	out = filepath.Join(dir, "loo_enc.csv")
	mustRun(t, "encode", in, "--target", "late", "--columns", "parcel_type", "--scheme", "loo", "--methods", "target:m=1",
		"--out", out, "--tables", filepath.Join(dir, "loo_tables"))
	vals := readTable(t, out).col(t, "parcel_type_tmean")
	if v := parseF(t, vals[0]); !near(v, 49.5/101, 1e-12) {
		t.Errorf("positive bulky row: %.15g, want 49.5/101", v)
	}
	if v := parseF(t, vals[100]); !near(v, 50.5/101, 1e-12) {
		t.Errorf("negative bulky row: %.15g, want 50.5/101", v)
	}
}

// TestPriorByColumn checks the hierarchical prior from another column
// (Micci-Barreca 2001: a level's statistic is blended with that of its
// parent group; values computed from the m-estimate formula). Rows
// (region, postcode, late), k-fold scheme none, m = 1:
//
//	north P1 1, north P1 1, north P2 0, south P3 0, south P3 0, south P4 1
//
// global prior p = 3/6; north (2 of 3): (2 + 0.5)/(3 + 1) = 0.625; south
// (1 of 3): 1.5/4 = 0.375. P1: (2 + 0.625)/(2 + 1) = 0.875; P2: 0.625/2 =
// 0.3125; P3: 0.375/3 = 0.125; P4: 1.375/2 = 0.6875. A new row of an unseen
// postcode in the north gets 0.625.
func TestPriorByColumn(t *testing.T) {
	dir := t.TempDir()
	in := writeFile(t, dir, "shipments.csv", "region,postcode,late\nnorth,P1,1\nnorth,P1,1\nnorth,P2,0\nsouth,P3,0\nsouth,P3,0\nsouth,P4,1\n")
	out := filepath.Join(dir, "enc.csv")
	tables := filepath.Join(dir, "tables")
	mustRun(t, "encode", in, "--target", "late", "--columns", "postcode", "--scheme", "none", "--methods", "target:m=1:prior=column:region",
		"--out", out, "--tables", tables)
	want := []float64{0.875, 0.875, 0.3125, 0.125, 0.125, 0.6875}
	for i, s := range readTable(t, out).col(t, "postcode_tmean") {
		if v := parseF(t, s); !near(v, want[i], 1e-12) {
			t.Errorf("row %d: %.15g, want %.15g", i+1, v, want[i])
		}
	}
	fresh := writeFile(t, dir, "new.csv", "region,postcode,late\nnorth,P9,\nsouth,P9,\nwest,P9,\n")
	app := filepath.Join(dir, "app.csv")
	mustRun(t, "apply", fresh, "--tables", tables, "--out", app)
	for i, w := range []float64{0.625, 0.375, 0.5} {
		if v := parseF(t, readTable(t, app).col(t, "postcode_tmean")[i]); !near(v, w, 1e-12) {
			t.Errorf("new row %d: %.15g, want %.15g", i+1, v, w)
		}
	}
}

// TestParquetCopiesKeptColumns: with Parquet in and out, encode and apply
// copy the kept columns' chunks as they are, in the input's row groups,
// and the output reads back cell for cell as the output from CSV input.
func TestParquetCopiesKeptColumns(t *testing.T) {
	dir := t.TempDir()
	s, batches := shipmentBatches()
	csvIn := filepath.Join(dir, "shipments.csv")
	writeTable(t, csvIn, s, batches...)
	pqIn := filepath.Join(dir, "shipments.parquet")
	w, err := tableio.Create(pqIn, s, tableio.WriteOptions{Parquet: pqio.WriterOptions{RowGroupRows: 70}})
	if err != nil {
		t.Fatal(err)
	}
	for _, b := range batches {
		if err := w.Write(b); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.Commit(); err != nil {
		t.Fatal(err)
	}
	args := []string{"--target", "late", "--columns", "postcode,sender", "--methods", "target:eb+freq+hash",
		"--folds", "3", "--seed", "4", "--fold-column", "fold"}
	for _, comp := range []string{"snappy", "zstd"} {
		outs := map[string]string{}
		for _, in := range []string{csvIn, pqIn} {
			base := filepath.Join(dir, comp+"-"+filepath.Ext(in)[1:])
			mustRun(t, append([]string{"encode", in, "--out", base + ".parquet", "--tables", base + "-tables", "--compression", comp}, args...)...)
			mustRun(t, "apply", in, "--tables", base+"-tables", "--out", base+"-applied.parquet", "--compression", comp)
			outs[in] = base
		}
		for _, suffix := range []string{".parquet", "-applied.parquet"} {
			a, b := readTable(t, outs[csvIn]+suffix), readTable(t, outs[pqIn]+suffix)
			if !slices.Equal(a.names, b.names) || !reflect.DeepEqual(a.rows, b.rows) {
				t.Fatalf("%s%s: Parquet input gives another table than CSV input", comp, suffix)
			}
			// The output of Parquet input has the input's row groups,
			// and its route chunks (snappy in, snappy out) are the
			// input's bytes.
			inMeta, outMeta := footer(t, pqIn), footer(t, outs[pqIn]+suffix)
			if len(outMeta.RowGroups) != len(inMeta.RowGroups) || len(inMeta.RowGroups) != 5 {
				t.Fatalf("%s%s: %d row groups, the input %d (want 5)", comp, suffix, len(outMeta.RowGroups), len(inMeta.RowGroups))
			}
			route := slices.Index(s.Names(), "route")
			for g := range inMeta.RowGroups {
				in, out := inMeta.RowGroups[g].Columns[route].MetaData, outMeta.RowGroups[g].Columns[route].MetaData
				if comp == "snappy" && in.TotalCompressedSize != out.TotalCompressedSize {
					t.Fatalf("row group %d: route chunk of %d bytes, the input's %d", g, out.TotalCompressedSize, in.TotalCompressedSize)
				}
				if out.Codec.String() != strings.ToUpper(comp) {
					t.Fatalf("row group %d: route chunk codec %v, want %s", g, out.Codec, comp)
				}
			}
		}
	}
}

// footer reads the metadata of a Parquet file.
func footer(t *testing.T, path string) *format.FileMetaData {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	st, _ := f.Stat()
	pf, err := parquet.OpenFile(f, st.Size())
	if err != nil {
		t.Fatal(err)
	}
	return pf.Metadata()
}

// TestTopKCodesOnlyWithTopK: a mapping table holds the columns of the
// encodings its column was fitted with (format 3): the level's top-k code
// with topk, no topk column without it.
func TestTopKCodesOnlyWithTopK(t *testing.T) {
	dir := t.TempDir()
	in := writeFile(t, dir, "shipments.csv", shipmentsCSV(400))
	var tables []*textTable
	for i, methods := range []string{"target:eb", "target:eb+topk:3"} {
		tab := filepath.Join(dir, fmt.Sprint("tables", i))
		mustRun(t, "encode", in, "--target", "late", "--columns", "sender", "--methods", methods,
			"--out", filepath.Join(dir, fmt.Sprint("enc", i, ".csv")), "--tables", tab)
		tables = append(tables, readTable(t, filepath.Join(tab, "01-sender.parquet")))
	}
	if slices.Contains(tables[0].names, "topk") {
		t.Fatalf("table of target:eb alone has a topk column: %v", tables[0].names)
	}
	coded := 0
	for _, c := range tables[1].col(t, "topk") {
		if c != "0" {
			coded++
		}
	}
	if coded != 3 {
		t.Fatalf("%d levels coded, want 3: %v", coded, tables[1].col(t, "topk"))
	}
}
