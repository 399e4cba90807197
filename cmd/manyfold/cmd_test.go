package main

import (
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	"manyfold/io/table"
	"manyfold/io/tableio"
)

// The tests in this package call run in-process and swap os.Stdout and
// os.Stderr while they do, so none of them may run in parallel.

// result is what one command line did.
type result struct {
	code   int
	stdout string
	stderr string
}

// runCLI runs the command line args in-process with standard output and
// standard error captured in files, and fails the test if run panics.
func runCLI(t *testing.T, args ...string) result {
	t.Helper()
	return runStdin(t, nil, args...)
}

// runStdin is runCLI with standard input reading stdin (when not nil).
func runStdin(t *testing.T, stdin []byte, args ...string) result {
	t.Helper()
	dir := t.TempDir()
	if stdin != nil {
		p := filepath.Join(dir, "stdin")
		if err := os.WriteFile(p, stdin, 0o644); err != nil {
			t.Fatal(err)
		}
		in, err := os.Open(p)
		if err != nil {
			t.Fatal(err)
		}
		defer in.Close()
		old := os.Stdin
		os.Stdin = in
		defer func() { os.Stdin = old }()
	}
	outF, err := os.Create(filepath.Join(dir, "stdout"))
	if err != nil {
		t.Fatal(err)
	}
	errF, err := os.Create(filepath.Join(dir, "stderr"))
	if err != nil {
		t.Fatal(err)
	}
	oldOut, oldErr := os.Stdout, os.Stderr
	os.Stdout, os.Stderr = outF, errF
	var res result
	var panicked any
	func() {
		defer func() { panicked = recover() }()
		res.code = run(args)
	}()
	os.Stdout, os.Stderr = oldOut, oldErr
	outF.Close()
	errF.Close()
	o, _ := os.ReadFile(outF.Name())
	e, _ := os.ReadFile(errF.Name())
	res.stdout, res.stderr = string(o), string(e)
	if panicked != nil {
		t.Fatalf("manyfold %s panicked: %v\nstderr: %s", strings.Join(args, " "), panicked, res.stderr)
	}
	return res
}

// mustRun runs args and fails the test unless they exit 0.
func mustRun(t *testing.T, args ...string) result {
	t.Helper()
	res := runCLI(t, args...)
	if res.code != exitOK {
		t.Fatalf("manyfold %s: exit %d, want 0\nstderr: %s", strings.Join(args, " "), res.code, res.stderr)
	}
	return res
}

// writeFile writes text to name in dir and returns its path.
func writeFile(t *testing.T, dir, name, text string) string {
	t.Helper()
	p := filepath.Join(dir, name)
	if err := os.WriteFile(p, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

// textTable is a table read back as cell text; a null cell is nullCell.
type textTable struct {
	names []string
	kinds []table.Kind
	rows  [][]string
}

const nullCell = "<null>"

// col returns the cells of the column named name.
func (tt *textTable) col(t *testing.T, name string) []string {
	t.Helper()
	j := slices.Index(tt.names, name)
	if j < 0 {
		t.Fatalf("no column %q in %v", name, tt.names)
	}
	out := make([]string, len(tt.rows))
	for i, r := range tt.rows {
		out[i] = r[j]
	}
	return out
}

// readTable reads any table manyfold reads into cell text.
func readTable(t *testing.T, path string) *textTable {
	t.Helper()
	r, err := tableio.Open(path, tableio.ReadOptions{})
	if err != nil {
		t.Fatalf("open %s: %v", path, err)
	}
	defer r.Close()
	tt := &textTable{names: r.Schema().Names()}
	for _, f := range r.Schema().Fields {
		tt.kinds = append(tt.kinds, f.Kind)
	}
	var buf []byte
	for {
		b, err := r.Next()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatalf("read %s: %v", path, err)
		}
		for i := 0; i < b.Rows; i++ {
			row := make([]string, len(b.Cols))
			for j := range b.Cols {
				if b.Cols[j].IsNull(i) {
					row[j] = nullCell
					continue
				}
				buf = b.Cols[j].AppendText(buf[:0], i)
				row[j] = string(buf)
			}
			tt.rows = append(tt.rows, row)
		}
	}
	return tt
}

// textColumn builds a text column from cells; nullCell marks a null.
func textColumn(cells []string) table.Column {
	c := table.Column{Form: table.FormText, Offsets: []int32{0}}
	for i, s := range cells {
		if s == nullCell {
			if c.Nulls == nil {
				c.Nulls = make([]bool, len(cells))
			}
			c.Nulls[i] = true
			s = ""
		}
		c.Data = append(c.Data, s...)
		c.Offsets = append(c.Offsets, int32(len(c.Data)))
	}
	return c
}

// intColumn builds an int64 column.
func intColumn(v []int64) table.Column {
	return table.Column{Form: table.FormInt64, Ints: v}
}

// writeTable writes the batches with the schema to path through tableio
// (the format follows the extension).
func writeTable(t *testing.T, path string, s *table.Schema, batches ...*table.Batch) {
	t.Helper()
	w, err := tableio.Create(path, s, tableio.WriteOptions{})
	if err != nil {
		t.Fatal(err)
	}
	for _, b := range batches {
		if err := w.Write(b); err != nil {
			w.Abort()
			t.Fatalf("write %s: %v", path, err)
		}
	}
	if err := w.Commit(); err != nil {
		t.Fatal(err)
	}
}

// dirEntries lists the names in dir (nil if dir does not exist).
func dirEntries(t *testing.T, dir string) []string {
	t.Helper()
	es, err := os.ReadDir(dir)
	if errors.Is(err, os.ErrNotExist) {
		return nil
	}
	if err != nil {
		t.Fatal(err)
	}
	var out []string
	for _, e := range es {
		out = append(out, e.Name())
	}
	return out
}

// noTempFiles fails the test if dir holds a file whose name starts with
// "." (the temporary files outputs are written to before their rename).
func noTempFiles(t *testing.T, dir string) {
	t.Helper()
	for _, n := range dirEntries(t, dir) {
		if strings.HasPrefix(n, ".") {
			t.Errorf("temporary file %s left in %s", n, dir)
		}
	}
}

// shipmentsCSV returns a small CSV of shipments: postcode, sender account,
// route, parcel type, late (0/1) and cost, n rows, deterministic.
func shipmentsCSV(n int) string {
	var b strings.Builder
	b.WriteString("postcode,sender,route,parcel_type,late,cost\n")
	types := []string{"letter", "small", "medium", "bulky"}
	for i := 0; i < n; i++ {
		pc := fmt.Sprintf("PC%03d", (i*7)%23)
		snd := fmt.Sprintf("ACC-%d", (i*i+3)%11)
		route := fmt.Sprintf("R%d-%d", i%4, (i/3)%5)
		late := (i*13 + i/5) % 3 % 2
		cost := 2.5 + float64((i*17)%40)/4
		fmt.Fprintf(&b, "%s,%s,%s,%s,%d,%g\n", pc, snd, route, types[(i/2)%4], late, cost)
	}
	return b.String()
}

func TestTopLevel(t *testing.T) {
	cases := []struct {
		name   string
		args   []string
		code   int
		stdout string
		stderr string
	}{
		{"no args", nil, exitUsage, "Usage:", ""},
		{"help", []string{"help"}, exitOK, "Exit codes", ""},
		{"--help", []string{"--help"}, exitOK, "manyfold encode FILE", ""},
		{"version", []string{"version"}, exitOK, "manyfold 0.", ""},
		{"unknown command", []string{"fold"}, exitUsage, "", `unknown command "fold"`},
		{"command help", []string{"encode", "--help"}, exitOK, "--methods", ""},
		{"bad flag", []string{"scan", "--nonsense", "x.csv"}, exitUsage, "", "--nonsense"},
		{"scan two files", []string{"scan", "a.csv", "b.csv"}, exitUsage, "", "one input file"},
		{"encode without out", []string{"encode", "a.csv", "--columns", "a"}, exitUsage, "", "--out and --tables"},
		{"bad delimiter", []string{"scan", "a.csv", "--delimiter", "x"}, exitUsage, "", `--delimiter "x"`},
		{"bad type", []string{"scan", "a.csv", "--type", "postcode=colour"}, exitUsage, "", "postcode=colour"},
		{"merge one dir", []string{"merge", "a", "--tables", "m"}, exitUsage, "", "two or more"},
		{"demo few rows", []string{"demo", "--rows", "3", "--dir", "x"}, exitUsage, "", "at least 10"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			res := runCLI(t, c.args...)
			if res.code != c.code {
				t.Fatalf("exit %d, want %d; stderr: %s", res.code, c.code, res.stderr)
			}
			if !strings.Contains(res.stdout, c.stdout) {
				t.Errorf("stdout %q does not contain %q", res.stdout, c.stdout)
			}
			if !strings.Contains(res.stderr, c.stderr) {
				t.Errorf("stderr %q does not contain %q", res.stderr, c.stderr)
			}
			if n := strings.Count(res.stdout, "Usage:"); n > 1 {
				t.Errorf("the usage is printed %d times", n)
			}
		})
	}
}

func TestScanText(t *testing.T) {
	dir := t.TempDir()
	in := writeFile(t, dir, "shipments.csv", shipmentsCSV(60))
	res := mustRun(t, "scan", in, "--columns", "postcode,parcel_type", "--top", "2")
	for _, want := range []string{"postcode  [text]  60 rows, 0 null", "23 distinct", "parcel_type  [text]", "4 distinct", "suggested:"} {
		if !strings.Contains(res.stdout, want) {
			t.Errorf("scan output lacks %q:\n%s", want, res.stdout)
		}
	}
	res = mustRun(t, "scan", in, "--columns", "sender", "--json")
	if !strings.Contains(res.stdout, `"file": "`+in+`"`) || !strings.Contains(res.stdout, `"columns"`) {
		t.Errorf("scan --json output:\n%s", res.stdout)
	}
}

// TestEncodeSummary checks the encode summary line and that a successful
// run leaves its outputs and no temporary files.
func TestEncodeSummary(t *testing.T) {
	dir := t.TempDir()
	in := writeFile(t, dir, "shipments.csv", shipmentsCSV(40))
	out := filepath.Join(dir, "enc.parquet")
	tables := filepath.Join(dir, "tables")
	res := mustRun(t, "encode", in, "--target", "late", "--columns", "postcode,sender", "--methods", "target:eb+freq",
		"--out", out, "--tables", tables)
	for _, want := range []string{"encoded 40 rows", "postcode 23 levels", "sender ", "wrote " + out} {
		if !strings.Contains(res.stderr, want) {
			t.Errorf("summary %q lacks %q", res.stderr, want)
		}
	}
	if strings.Contains(res.stderr, "empty target") {
		t.Errorf("summary mentions empty targets that are not there: %q", res.stderr)
	}
	tt := readTable(t, out)
	want := []string{"postcode", "sender", "route", "parcel_type", "late", "cost", "postcode_tmean", "postcode_freq", "sender_tmean", "sender_freq"}
	if !slices.Equal(tt.names, want) {
		t.Errorf("output columns %v, want %v", tt.names, want)
	}
	if len(tt.rows) != 40 {
		t.Errorf("%d output rows, want 40", len(tt.rows))
	}
	ents := dirEntries(t, tables)
	if !slices.Contains(ents, "manifest.json") || !slices.Contains(ents, "01-postcode.parquet") || !slices.Contains(ents, "02-sender.parquet") {
		t.Errorf("tables dir holds %v", ents)
	}
	noTempFiles(t, dir)
	noTempFiles(t, tables)
}

// TestDemo runs the demo on a small table and checks that every file it
// names exists.
func TestDemo(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "demo")
	res := mustRun(t, "demo", "--rows", "2000", "--dir", dir)
	_, files, ok := strings.Cut(res.stdout, "\nfiles: ")
	if !ok {
		t.Fatalf("demo output has no files line:\n%s", res.stdout)
	}
	var named []string
	for _, f := range strings.Fields(files) {
		if strings.HasPrefix(f, dir) {
			named = append(named, strings.TrimRight(f, ",:"))
		}
	}
	if len(named) != 4 {
		t.Fatalf("demo names %d files (%v), want 4", len(named), named)
	}
	// The demo shows good practice: none of its own choices draws a warning.
	if strings.Contains(res.stdout+res.stderr, "warning:") {
		t.Errorf("the demo warns:\n%s%s", res.stdout, res.stderr)
	}
	for _, p := range named {
		if _, err := os.Stat(p); err != nil {
			t.Errorf("demo names %s: %v", p, err)
		}
	}
	if _, err := os.Stat(filepath.Join(dir, "tables", "manifest.json")); err != nil {
		t.Error(err)
	}
	// The training table has the rows asked for, the encoded table too,
	// with its fold column; the new table a quarter as many.
	train := readTable(t, filepath.Join(dir, "shipments_encoded.parquet"))
	if len(train.rows) != 2000 || !slices.Contains(train.names, "fold") || !slices.Contains(train.names, "dest_postcode_tmean") {
		t.Errorf("encoded training table: %d rows, columns %v", len(train.rows), train.names)
	}
	fresh := readTable(t, filepath.Join(dir, "new_shipments_encoded.csv"))
	if len(fresh.rows) != 500 || !slices.Contains(fresh.names, "sender_account_hash") {
		t.Errorf("encoded new table: %d rows, columns %v", len(fresh.rows), fresh.names)
	}
	for _, step := range []string{"$ manyfold scan", "$ manyfold encode", "$ manyfold apply"} {
		if !strings.Contains(res.stdout, step) {
			t.Errorf("demo output lacks %q", step)
		}
	}
	noTempFiles(t, dir)
}

// parseF parses a cell as a float64.
func parseF(t *testing.T, s string) float64 {
	t.Helper()
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		t.Fatalf("cell %q: %v", s, err)
	}
	return v
}

// near reports whether a and b differ by at most tol.
func near(a, b, tol float64) bool { return math.Abs(a-b) <= tol }
