package main

import (
	"bytes"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"manyfold/encoders/pipeline"
	"manyfold/io/table"
)

// badCase is a command line that must fail with a documented exit code and
// a one-line message holding every string in want, leaving no output
// behind. setup writes the inputs into dir and returns the arguments; the
// outputs go under dir/out, which exists and must be empty afterwards.
type badCase struct {
	name  string
	setup func(t *testing.T, dir string) []string
	code  int
	want  []string
}

// inPlaceholder in a badCase's want stands for the input's path, the
// second argument of the command line.
const inPlaceholder = "<input>"

func runBad(t *testing.T, cases []badCase) {
	t.Helper()
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			dir := t.TempDir()
			outDir := filepath.Join(dir, "out")
			if err := os.Mkdir(outDir, 0o755); err != nil {
				t.Fatal(err)
			}
			args := c.setup(t, dir)
			before := snapshot(t, dir)
			want := make([]string, len(c.want))
			for i, w := range c.want {
				if w == inPlaceholder {
					w = args[1]
				}
				want[i] = w
			}
			res := runCLI(t, args...)
			if res.code != c.code {
				t.Fatalf("exit %d, want %d; stderr: %s", res.code, c.code, res.stderr)
			}
			msg := strings.TrimSuffix(res.stderr, "\n")
			t.Log(msg)
			if msg == "" || strings.Contains(msg, "\n") {
				t.Errorf("want a one-line message, got %q", res.stderr)
			}
			if !strings.HasPrefix(msg, "manyfold "+args[0]+": ") {
				t.Errorf("message %q does not start with the command", msg)
			}
			for _, w := range want {
				if !strings.Contains(msg, w) {
					t.Errorf("message %q lacks %q", msg, w)
				}
			}
			if ents := dirEntries(t, outDir); len(ents) != 0 {
				t.Errorf("output left behind in %s: %v", outDir, ents)
			}
			noTempFiles(t, dir)
			// The inputs (and tables read) are untouched.
			after := snapshot(t, dir)
			for p, b := range before {
				if !bytes.Equal(after[p], b) {
					t.Errorf("%s changed", p)
				}
			}
			for p := range after {
				if _, ok := before[p]; !ok {
					t.Errorf("new file %s", p)
				}
			}
		})
	}
}

// snapshot returns the contents of every file under dir.
func snapshot(t *testing.T, dir string) map[string][]byte {
	t.Helper()
	m := map[string][]byte{}
	err := filepath.WalkDir(dir, func(p string, d os.DirEntry, err error) error {
		if err != nil || d.IsDir() {
			return err
		}
		b, err := os.ReadFile(p)
		m[p] = b
		return err
	})
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// Small inputs, each broken in one way. Lines count the header as line 1.
const (
	goodCSV   = "postcode,sender,late\nPC1,ACC-1,1\nPC2,ACC-2,0\nPC1,ACC-2,0\nPC3,ACC-1,1\n"
	raggedCSV = "postcode,sender,late\nPC1,ACC-1,1\nPC2,ACC-2\nPC3,ACC-1,0\n"
	// The quote opens on line 3 and is never closed; the file runs on
	// for two more lines.
	openQuoteCSV = "postcode,sender,late\nPC1,ACC-1,1\n\"PC2,ACC-2,0\nPC3,ACC-1,0\nPC4,ACC-3,1\n"
	dupNameCSV   = "postcode,sender,postcode,late\nPC1,ACC-1,PC1,1\n"
	emptyNameCSV = "postcode,,late\nPC1,ACC-1,1\n"
)

// inputKinds are the ways a table can be unreadable or broken; each gives
// the file's name, a function writing it into dir, and the expected code
// and message parts (with the file's path prepended at run time).
type inputKind struct {
	name  string
	file  string
	write func(t *testing.T, path string)
	code  int
	want  []string
}

func textInput(s string) func(t *testing.T, path string) {
	return func(t *testing.T, path string) {
		if err := os.WriteFile(path, []byte(s), 0o644); err != nil {
			t.Fatal(err)
		}
	}
}

// junk is bytes that are neither text nor a Parquet or Arrow file.
func junk() []byte {
	b := make([]byte, 600)
	x := uint32(2463534242)
	for i := range b {
		x ^= x << 13
		x ^= x >> 17
		x ^= x << 5
		b[i] = byte(x)
	}
	b[3] = 0 // a NUL near the start, in case the generator gave none
	return b
}

// writeTruncatedParquet writes a valid Parquet table of shipments and cuts
// it in half.
func writeTruncatedParquet(t *testing.T, path string) {
	full := path + ".full.parquet"
	s := &table.Schema{Fields: []table.Field{{Name: "postcode", Kind: table.String, Nullable: true}, {Name: "late", Kind: table.Int64}}}
	var pcs []string
	var late []int64
	for i := 0; i < 500; i++ {
		pcs = append(pcs, fmt.Sprintf("PC%04d", i*37%211))
		late = append(late, int64(i%3%2))
	}
	writeTable(t, full, s, &table.Batch{Rows: len(pcs), Cols: []table.Column{textColumn(pcs), intColumn(late)}, FirstRow: 1})
	b, err := os.ReadFile(full)
	if err != nil {
		t.Fatal(err)
	}
	os.Remove(full)
	if err := os.WriteFile(path, b[:len(b)/2], 0o644); err != nil {
		t.Fatal(err)
	}
}

var inputKinds = []inputKind{
	{"missing file", "missing.csv", func(*testing.T, string) {}, exitInput, []string{"no such file"}},
	{"empty file", "zero.csv", textInput(""), exitInput, []string{"file is empty"}},
	{"binary junk", "junk.bin", textInput(string(junk())), exitInput, []string{"not a CSV, NDJSON, Parquet or Arrow IPC file"}},
	{"ragged row", "ragged.csv", textInput(raggedCSV), exitData, []string{":3: 2 fields, header has 3"}},
	{"unterminated quote", "quote.csv", textInput(openQuoteCSV), exitData, []string{":3: ", `column "postcode"`, "never closed"}},
	{"duplicate header name", "dup.csv", textInput(dupNameCSV), exitData, []string{":1: ", `column "postcode"`, "named twice", "columns 1 and 3"}},
	{"empty header name", "noname.csv", textInput(emptyNameCSV), exitData, []string{":1: ", "header column 2", "empty name"}},
	{"truncated parquet", "cut.parquet", writeTruncatedParquet, exitInput, []string{"corrupt or truncated"}},
}

// TestBadInputs runs scan, encode and apply on every kind of broken input.
func TestBadInputs(t *testing.T) {
	var cases []badCase
	for _, k := range inputKinds {
		in := func(t *testing.T, dir string) string {
			p := filepath.Join(dir, k.file)
			k.write(t, p)
			return p
		}
		want := append([]string{inPlaceholder}, k.want...)
		cases = append(cases,
			badCase{"scan " + k.name, func(t *testing.T, dir string) []string {
				return []string{"scan", in(t, dir)}
			}, k.code, want},
			badCase{"encode " + k.name, func(t *testing.T, dir string) []string {
				return []string{"encode", in(t, dir), "--target", "late", "--columns", "postcode",
					"--methods", "target:eb+freq", "--out", filepath.Join(dir, "out", "enc.parquet"), "--tables", filepath.Join(dir, "out", "tables")}
			}, k.code, want},
			badCase{"apply " + k.name, func(t *testing.T, dir string) []string {
				tables := fitTables(t, dir, goodCSV, "--columns", "postcode")
				return []string{"apply", in(t, dir), "--tables", tables, "--out", filepath.Join(dir, "out", "new.csv")}
			}, k.code, want},
		)
	}
	runBad(t, cases)
}

// fitTables encodes the CSV text (written to dir/train.csv) with the
// flags, target late, and returns the tables directory (dir/tables).
func fitTables(t *testing.T, dir, csv string, flags ...string) string {
	t.Helper()
	train := writeFile(t, dir, "train.csv", csv)
	tables := filepath.Join(dir, "tables")
	args := append([]string{"encode", train, "--target", "late", "--out", filepath.Join(dir, "train_enc.csv"), "--tables", tables, "--folds", "2"}, flags...)
	mustRun(t, args...)
	return tables
}

// editManifest rewrites one field of the manifest in the tables directory.
func editManifest(t *testing.T, tables, key string, value any) {
	t.Helper()
	p := filepath.Join(tables, pipeline.ManifestName)
	b, err := os.ReadFile(p)
	if err != nil {
		t.Fatal(err)
	}
	var m map[string]any
	if err := json.Unmarshal(b, &m); err != nil {
		t.Fatal(err)
	}
	if _, ok := m[key]; !ok {
		t.Fatalf("manifest has no %q", key)
	}
	m[key] = value
	b, err = json.Marshal(m)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(p, b, 0o644); err != nil {
		t.Fatal(err)
	}
}

// csvWith writes text to dir/name and returns the path.
func csvWith(text string) func(t *testing.T, dir string) string {
	return func(t *testing.T, dir string) string { return writeFile(t, dir, "shipments.csv", text) }
}

func encodeArgs(dir, in string, flags ...string) []string {
	return append([]string{"encode", in, "--out", filepath.Join(dir, "out", "enc.csv"), "--tables", filepath.Join(dir, "out", "tables")}, flags...)
}

// manyClasses is a CSV whose text target has MaxClasses+1 classes, the
// last new one on line MaxClasses+2.
func manyClasses() string {
	var b strings.Builder
	b.WriteString("postcode,late\n")
	for i := 0; i <= pipeline.MaxClasses; i++ {
		fmt.Fprintf(&b, "PC%d,status-%02d\n", i%5, i)
	}
	return b.String()
}

func TestBadEncode(t *testing.T) {
	line := func(n int) string { return fmt.Sprintf(":%d: ", n) }
	cases := []badCase{
		{"scan unknown column", func(t *testing.T, dir string) []string {
			return []string{"scan", csvWith(goodCSV)(t, dir), "--columns", "postcode,sendr"}
		}, exitUsage, []string{"shipments.csv", `--columns names column "sendr"`, `closest: "sender"`}},
		{"scan unknown target", func(t *testing.T, dir string) []string {
			return []string{"scan", csvWith(goodCSV)(t, dir), "--columns", "postcode", "--target", "lates"}
		}, exitUsage, []string{"shipments.csv", `--target names column "lates"`, `closest: "late"`}},
		{"encode unknown column", func(t *testing.T, dir string) []string {
			return encodeArgs(dir, csvWith(goodCSV)(t, dir), "--target", "late", "--columns", "postcod")
		}, exitUsage, []string{"shipments.csv", `--columns names column "postcod"`, `closest: "postcode"`}},
		{"target missing", func(t *testing.T, dir string) []string {
			return encodeArgs(dir, csvWith(goodCSV)(t, dir), "--target", "lates", "--columns", "postcode")
		}, exitUsage, []string{"shipments.csv", `--target names column "lates"`, `closest: "late"`}},
		{"target all null", func(t *testing.T, dir string) []string {
			return encodeArgs(dir, csvWith("postcode,late\nPC1,\nPC2,\nPC1,\n")(t, dir), "--target", "late", "--columns", "postcode")
		}, exitData, []string{"shipments.csv", `column "late"`, "null in every row"}},
		{"regression target not a number", func(t *testing.T, dir string) []string {
			return encodeArgs(dir, csvWith("postcode,cost\nPC1,4.5\nPC2,3\nPC1,n/a\nPC3,7\n")(t, dir),
				"--target", "cost", "--task", "regression", "--columns", "postcode")
		}, exitData, []string{"shipments.csv" + line(4), `column "cost"`, `"n/a" is not a number`}},
		{"too many classes", func(t *testing.T, dir string) []string {
			return encodeArgs(dir, csvWith(manyClasses())(t, dir), "--target", "late", "--columns", "postcode")
		}, exitData, []string{"shipments.csv" + line(pipeline.MaxClasses+2), `column "late"`, fmt.Sprintf("more than %d classes", pipeline.MaxClasses)}},
		{"file not sorted by --order-by", func(t *testing.T, dir string) []string {
			return encodeArgs(dir, csvWith("day,postcode,late\n2026-01-01,PC1,1\n2026-01-02,PC2,0\n2026-01-01,PC1,1\n")(t, dir),
				"--target", "late", "--columns", "postcode", "--scheme", "ordered", "--order-by", "day")
		}, exitData, []string{"shipments.csv" + line(4), `column "day"`, "not sorted"}},
		{"NaN target", func(t *testing.T, dir string) []string {
			return encodeArgs(dir, csvWith("postcode,late\nPC1,1\nPC2,0\nPC1,NaN\nPC3,1\n")(t, dir), "--target", "late", "--columns", "postcode")
		}, exitData, []string{"shipments.csv" + line(4), `column "late"`, "NaN"}},
		{"Inf target", func(t *testing.T, dir string) []string {
			return encodeArgs(dir, csvWith("postcode,late\nPC1,1\nPC2,0\nPC1,1\nPC3,+Inf\n")(t, dir), "--target", "late", "--columns", "postcode")
		}, exitData, []string{"shipments.csv" + line(5), `column "late"`, "Inf"}},
		{"NaN regression target", func(t *testing.T, dir string) []string {
			return encodeArgs(dir, csvWith("postcode,cost\nPC1,4.5\nPC2,NaN\nPC1,3.25\n")(t, dir),
				"--target", "cost", "--task", "regression", "--columns", "postcode")
		}, exitData, []string{"shipments.csv" + line(3), `column "cost"`, "NaN"}},
		{"Inf regression target", func(t *testing.T, dir string) []string {
			return encodeArgs(dir, csvWith("postcode,cost\nPC1,4.5\nPC2,2.5\nPC1,-Inf\n")(t, dir),
				"--target", "cost", "--columns", "postcode")
		}, exitData, []string{"shipments.csv" + line(4), `column "cost"`, "Inf"}},
		{"folds 1", func(t *testing.T, dir string) []string {
			return encodeArgs(dir, csvWith(goodCSV)(t, dir), "--target", "late", "--columns", "postcode", "--folds", "1")
		}, exitUsage, []string{"--folds 1"}},
		{"folds above the rows", func(t *testing.T, dir string) []string {
			return encodeArgs(dir, csvWith(goodCSV)(t, dir), "--target", "late", "--columns", "postcode", "--folds", "9")
		}, exitUsage, []string{"shipments.csv", "--folds 9", "4 rows"}},
		{"group column missing", func(t *testing.T, dir string) []string {
			return encodeArgs(dir, csvWith(goodCSV)(t, dir), "--target", "late", "--columns", "postcode", "--fold-by", "group=sendr")
		}, exitUsage, []string{"shipments.csv", `names column "sendr"`, `closest: "sender"`}},
		{"out is the input", func(t *testing.T, dir string) []string {
			in := csvWith(goodCSV)(t, dir)
			return []string{"encode", in, "--target", "late", "--columns", "postcode", "--out", in, "--tables", filepath.Join(dir, "out", "tables")}
		}, exitUsage, []string{"--out", "shipments.csv", "is the input file"}},
		{"unknown output extension", func(t *testing.T, dir string) []string {
			return []string{"encode", csvWith(goodCSV)(t, dir), "--target", "late", "--columns", "postcode",
				"--out", filepath.Join(dir, "out", "enc.xlsx"), "--tables", filepath.Join(dir, "out", "tables")}
		}, exitUsage, []string{"enc.xlsx", "cannot tell the output format"}},
		{"unknown output format", func(t *testing.T, dir string) []string {
			return encodeArgs(dir, csvWith(goodCSV)(t, dir), "--target", "late", "--columns", "postcode", "--format", "xls")
		}, exitUsage, []string{`--format "xls"`}},
		{"unknown compression", func(t *testing.T, dir string) []string {
			return encodeArgs(dir, csvWith(goodCSV)(t, dir), "--target", "late", "--columns", "postcode", "--format", "parquet", "--compression", "lz4")
		}, exitUsage, []string{`--compression "lz4"`}},
		{"keep names an unknown column", func(t *testing.T, dir string) []string {
			return encodeArgs(dir, csvWith(goodCSV)(t, dir), "--target", "late", "--columns", "postcode", "--keep", "postcode,sendr")
		}, exitUsage, []string{"shipments.csv", `--keep names column "sendr"`, `closest: "sender"`}},
		{"header only", func(t *testing.T, dir string) []string {
			return encodeArgs(dir, csvWith("postcode,sender,late\n")(t, dir), "--target", "late", "--columns", "postcode")
		}, exitData, []string{"shipments.csv", "no rows"}},
		{"output directory missing", func(t *testing.T, dir string) []string {
			return []string{"encode", csvWith(goodCSV)(t, dir), "--target", "late", "--columns", "postcode", "--folds", "2",
				"--out", filepath.Join(dir, "out", "missing", "enc.csv"), "--tables", filepath.Join(dir, "out", "tables")}
		}, exitOutput, []string{filepath.Join("missing", "enc.csv"), "no such file"}},
		// The tables cannot be saved once the output is written: the
		// output must be removed and the input (named as --tables) kept.
		{"tables path is a file", func(t *testing.T, dir string) []string {
			in := csvWith(goodCSV)(t, dir)
			return []string{"encode", in, "--target", "late", "--columns", "postcode", "--folds", "2",
				"--out", filepath.Join(dir, "out", "enc.parquet"), "--tables", in}
		}, exitOutput, []string{"tables", "shipments.csv", "not a directory"}},
		// The forced type is only found wrong when the Parquet writer
		// converts the values, in the second pass: the partial output must
		// be removed.
		{"forced type the values contradict", func(t *testing.T, dir string) []string {
			return []string{"encode", csvWith(goodCSV)(t, dir), "--target", "late", "--columns", "postcode", "--folds", "2",
				"--type", "postcode=int", "--out", filepath.Join(dir, "out", "enc.parquet"), "--tables", filepath.Join(dir, "out", "tables")}
		}, exitData, []string{"shipments.csv:2:", `column "postcode"`, `"PC1" is not an integer`}},
		// The same with CSV output: the reader checks the values, so the
		// output format makes no difference.
		{"forced type contradicted, CSV out", func(t *testing.T, dir string) []string {
			return []string{"encode", csvWith(goodCSV)(t, dir), "--target", "late", "--columns", "postcode", "--folds", "2",
				"--type", "postcode=int", "--out", filepath.Join(dir, "out", "enc.csv"), "--tables", filepath.Join(dir, "out", "tables")}
		}, exitData, []string{"shipments.csv:2:", `column "postcode"`, `"PC1" is not an integer`}},
		{"encode target column", func(t *testing.T, dir string) []string {
			return encodeArgs(dir, csvWith(goodCSV)(t, dir), "--target", "late", "--columns", "postcode,late")
		}, exitUsage, []string{`"late" is the target`}},
	}
	runBad(t, cases)
}

func TestBadApply(t *testing.T) {
	applyArgs := func(dir, in, tables string) []string {
		return []string{"apply", in, "--tables", tables, "--out", filepath.Join(dir, "out", "new.parquet")}
	}
	fresh := "postcode,sender\nPC1,ACC-9\nPC7,ACC-1\n"
	cases := []badCase{
		{"other tool version", func(t *testing.T, dir string) []string {
			tables := fitTables(t, dir, goodCSV, "--columns", "postcode")
			editManifest(t, tables, "tool", "0.0.9")
			return applyArgs(dir, writeFile(t, dir, "new.csv", fresh), tables)
		}, exitMismatch, []string{"tables", "written by manyfold 0.0.9", "this is manyfold " + pipeline.Version}},
		{"other format version", func(t *testing.T, dir string) []string {
			tables := fitTables(t, dir, goodCSV, "--columns", "postcode")
			editManifest(t, tables, "format", pipeline.FormatVersion+1)
			return applyArgs(dir, writeFile(t, dir, "new.csv", fresh), tables)
		}, exitMismatch, []string{"tables", fmt.Sprintf("format version %d", pipeline.FormatVersion+1)}},
		{"no manifest", func(t *testing.T, dir string) []string {
			return applyArgs(dir, writeFile(t, dir, "new.csv", fresh), dir)
		}, exitMismatch, []string{"no manifest.json"}},
		{"input lacks an encoded column", func(t *testing.T, dir string) []string {
			tables := fitTables(t, dir, goodCSV, "--columns", "postcode,sender")
			return applyArgs(dir, writeFile(t, dir, "new.csv", "postcodes,sender\nPC1,ACC-1\n"), tables)
		}, exitUsage, []string{"new.csv", `names column "postcode"`, `closest: "postcodes"`}},
		{"column type contradicts the manifest", func(t *testing.T, dir string) []string {
			// postcode is an integer column in training, text in the new table.
			tables := fitTables(t, dir, "postcode,late\n1011,1\n1012,0\n1011,0\n1013,1\n", "--columns", "postcode")
			return applyArgs(dir, writeFile(t, dir, "new.csv", "postcode\n1011\nNL-1012\n"), tables)
		}, exitMismatch, []string{"new.csv", `column "postcode"`, "is text", "fitted on int"}},
		{"unknown output format", func(t *testing.T, dir string) []string {
			tables := fitTables(t, dir, goodCSV, "--columns", "postcode")
			return []string{"apply", writeFile(t, dir, "new.csv", fresh), "--tables", tables, "--out", filepath.Join(dir, "out", "new.xls")}
		}, exitUsage, []string{"new.xls", "cannot tell the output format"}},
		{"out is the input", func(t *testing.T, dir string) []string {
			tables := fitTables(t, dir, goodCSV, "--columns", "postcode")
			in := writeFile(t, dir, "new.csv", fresh)
			return []string{"apply", in, "--tables", tables, "--out", in}
		}, exitUsage, []string{"new.csv", "is the input file"}},
		// A ragged row late in the file is found while the output is being
		// written: the partial output must be removed.
		{"ragged row after the first batch", func(t *testing.T, dir string) []string {
			tables := fitTables(t, dir, goodCSV, "--columns", "postcode")
			var b strings.Builder
			b.WriteString("postcode,sender\n")
			for i := 0; i < 70000; i++ {
				fmt.Fprintf(&b, "PC%d,ACC-%d\n", i%7, i%13)
			}
			b.WriteString("PC1\n")
			return applyArgs(dir, writeFile(t, dir, "new.csv", b.String()), tables)
		}, exitData, []string{"new.csv:70002: 1 fields, header has 2"}},
	}
	runBad(t, cases)
}

// TestSomeTargetsMissing: rows with an empty target are encoded, not
// counted, and the summary says how many there were.
func TestSomeTargetsMissing(t *testing.T) {
	dir := t.TempDir()
	in := writeFile(t, dir, "shipments.csv", "postcode,late\nPC1,1\nPC2,\nPC1,0\nPC2,1\nPC3,\nPC1,1\n")
	out := filepath.Join(dir, "enc.csv")
	res := mustRun(t, "encode", in, "--target", "late", "--columns", "postcode", "--scheme", "none", "--methods", "target:m=0", "--out", out, "--tables", filepath.Join(dir, "tables"))
	if !strings.Contains(res.stderr, "encoded 6 rows (2 with an empty target") {
		t.Errorf("summary %q does not report the 2 rows with an empty target", res.stderr)
	}
	// With m=0 a seen level gets its plain mean over the rows with a
	// target: PC1 2/3, PC2 1/1; PC3 has no target row, so it gets the prior
	// of the 4 rows with a target, 3/4 (computed by hand).
	got := readTable(t, out).col(t, "postcode_tmean")
	want := []float64{2.0 / 3, 1, 2.0 / 3, 1, 0.75, 2.0 / 3}
	for i := range want {
		if v := parseF(t, got[i]); !near(v, want[i], 1e-12) {
			t.Errorf("row %d: postcode_tmean %v, want %v", i+1, v, want[i])
		}
	}
}

// TestStdin: "-" reads standard input; encode spools it to a temporary
// file, which messages do not name and which is removed afterwards.
func TestStdin(t *testing.T) {
	tmp := t.TempDir()
	t.Setenv("TMPDIR", tmp)
	dir := t.TempDir()
	ref := writeFile(t, dir, "shipments.csv", goodCSV)
	mustRun(t, "encode", ref, "--target", "late", "--columns", "postcode,sender", "--folds", "2",
		"--out", filepath.Join(dir, "ref.csv"), "--tables", filepath.Join(dir, "ref"))
	res := runStdin(t, []byte(goodCSV), "encode", "-", "--target", "late", "--columns", "postcode,sender", "--folds", "2",
		"--out", filepath.Join(dir, "stdin.csv"), "--tables", filepath.Join(dir, "tables"))
	if res.code != exitOK {
		t.Fatalf("encode -: exit %d: %s", res.code, res.stderr)
	}
	a, b := readTable(t, filepath.Join(dir, "ref.csv")), readTable(t, filepath.Join(dir, "stdin.csv"))
	if !reflect.DeepEqual(a, b) {
		t.Errorf("encoding standard input differs from encoding the file")
	}
	cases := []struct {
		args []string
		want string
	}{
		{[]string{"scan", "-"}, "manyfold scan: stdin:3: 2 fields, header has 3"},
		{[]string{"encode", "-", "--target", "late", "--columns", "postcode", "--out", filepath.Join(dir, "out.csv"), "--tables", filepath.Join(dir, "t2")},
			"manyfold encode: stdin:3: 2 fields, header has 3"},
		{[]string{"apply", "-", "--tables", filepath.Join(dir, "tables"), "--out", filepath.Join(dir, "out.csv")},
			"manyfold apply: stdin:3: 2 fields, header has 3"},
	}
	for _, c := range cases {
		res := runStdin(t, []byte(raggedCSV), c.args...)
		if res.code != exitData || strings.TrimSpace(res.stderr) != c.want {
			t.Errorf("%s -: exit %d, stderr %q; want %d, %q", c.args[0], res.code, res.stderr, exitData, c.want)
		}
	}
	if _, err := os.Stat(filepath.Join(dir, "out.csv")); err == nil {
		t.Errorf("output left behind")
	}
	noTempFiles(t, dir)
	if ents := dirEntries(t, tmp); len(ents) != 0 {
		t.Errorf("spooled standard input left in the temporary directory: %v", ents)
	}
}
