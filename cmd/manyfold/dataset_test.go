package main

import (
	"bytes"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"manyfold/io/table"
	"manyfold/io/tableio"
)

// shardSizes cuts n rows into k parts of uneven sizes, the second of them
// empty when k > 2: part i gets a share that grows with i.
func shardSizes(n, k int) []int {
	sizes := make([]int, k)
	weights, total := make([]int, k), 0
	for i := range weights {
		weights[i] = i + 1
		if k > 2 && i == 1 {
			weights[i] = 0
		}
		total += weights[i]
	}
	left := n
	for i := range sizes {
		sizes[i] = n * weights[i] / total
		left -= sizes[i]
	}
	sizes[k-1] += left
	return sizes
}

// writeShards writes the CSV text's rows as k files part-NNNNN.EXT in dir
// (each with the header; Parquet converted from its CSV), and returns dir.
func writeShards(t *testing.T, dir, csv string, k int, ext string) string {
	t.Helper()
	lines := strings.SplitAfter(strings.TrimSuffix(csv, "\n"), "\n")
	header, body := lines[0], lines[1:]
	if err := os.MkdirAll(dir, 0o755); err != nil {
		t.Fatal(err)
	}
	at := 0
	for i, n := range shardSizes(len(body), k) {
		text := header + strings.Join(body[at:at+n], "")
		if !strings.HasSuffix(text, "\n") {
			text += "\n"
		}
		at += n
		name := fmt.Sprintf("part-%05d.%s", i, ext)
		if ext == "csv" {
			writeFile(t, dir, name, text)
			continue
		}
		src := writeFile(t, t.TempDir(), "part.csv", text)
		convert(t, src, filepath.Join(dir, name))
	}
	return dir
}

// convert writes the table at src to dst (the format from dst's
// extension).
func convert(t *testing.T, src, dst string) {
	t.Helper()
	r, err := tableio.Open(src, tableio.ReadOptions{})
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	w, err := tableio.Create(dst, r.Schema(), tableio.WriteOptions{})
	if err != nil {
		t.Fatal(err)
	}
	for {
		b, err := r.Next()
		if err == io.EOF {
			break
		}
		if err != nil {
			w.Abort()
			t.Fatal(err)
		}
		if err := w.Write(b); err != nil {
			w.Abort()
			t.Fatal(err)
		}
	}
	if err := w.Commit(); err != nil {
		t.Fatal(err)
	}
}

// TestDatasetSameAsOneFile: a directory of parts (1, 2, 8 and 13 of them,
// uneven, one empty) encodes to the same output bytes and the same mapping
// tables as the one file of their rows, for binary, regression and
// multi-class targets, every scheme, the fold rules and every method; CSV
// and Parquet parts alike.
func TestDatasetSameAsOneFile(t *testing.T) {
	whole := decimalCosts(withNullPostcodes(shipmentsCSV(997)))
	const rest = "+freq+topk:5+hash:64+onehot:3"
	jobs := []struct {
		name   string
		target string
		flags  []string
	}{
		{"binary kfold", "late", []string{"--methods", "target:eb+woe" + rest}},
		{"binary loo", "late", []string{"--methods", "target:m=3" + rest, "--scheme", "loo"}},
		{"binary ordered", "late", []string{"--methods", "target:eb" + rest, "--scheme", "ordered"}},
		{"binary stratified prior=column", "late", []string{"--methods", "postcode=target:eb:prior=column:route" + rest + ",sender=target:blend=2,1" + rest, "--fold-by", "stratified"}},
		{"regression kfold", "cost", []string{"--methods", "target:eb" + rest}},
		{"regression ordered folds", "cost", []string{"--methods", "target:m=2:prior=prefix2" + rest, "--fold-by", "ordered"}},
		{"regression loo", "cost", []string{"--methods", "target:eb" + rest, "--scheme", "loo"}},
		{"multi-class kfold group", "parcel_type", []string{"--methods", "target:eb" + rest, "--fold-by", "group=sender"}},
		{"multi-class ordered", "parcel_type", []string{"--methods", "target:eb" + rest, "--scheme", "ordered"}},
	}
	for _, ext := range []string{"csv", "parquet"} {
		root := t.TempDir()
		one := filepath.Join(root, "whole."+ext)
		writeShards(t, filepath.Join(root, "one"), whole, 1, ext)
		if err := os.Rename(filepath.Join(root, "one", "part-00000."+ext), one); err != nil {
			t.Fatal(err)
		}
		for _, job := range jobs {
			encode := func(input, name string) (out []byte, tables string) {
				t.Helper()
				outPath := filepath.Join(root, name+".out.csv")
				tables = filepath.Join(root, name+".tables")
				args := []string{"encode", input, "--target", job.target, "--folds", "3", "--seed", "7", "--out", outPath, "--tables", tables}
				if !strings.Contains(strings.Join(job.flags, " "), "=target") {
					args = append(args, "--columns", "postcode,sender,route")
				}
				mustRun(t, append(args, job.flags...)...)
				b, err := os.ReadFile(outPath)
				if err != nil {
					t.Fatal(err)
				}
				return b, tables
			}
			t.Run(ext+" "+job.name, func(t *testing.T) {
				wantOut, wantTables := encode(one, "whole")
				for _, k := range []int{1, 2, 8, 13} {
					dir := writeShards(t, filepath.Join(root, fmt.Sprintf("%s-%d", strings.ReplaceAll(job.name, " ", "-"), k)), whole, k, ext)
					got, tables := encode(dir, fmt.Sprintf("parts%d", k))
					if !bytes.Equal(got, wantOut) {
						t.Errorf("%d parts: the output differs from the one file's (%d and %d bytes)", k, len(got), len(wantOut))
					}
					compareTablesDirs(t, tables, wantTables, "input", "training_score", "columns.training_score")
				}
			})
		}
	}
}

// TestDatasetParquetOutputCopies: a dataset of Parquet parts encoded into
// Parquet copies the kept columns' chunks (the output's row groups are the
// parts') and holds the same rows as the one file's output.
func TestDatasetParquetOutputCopies(t *testing.T) {
	root := t.TempDir()
	whole := decimalCosts(shipmentsCSV(500))
	dir := writeShards(t, filepath.Join(root, "parts"), whole, 8, "parquet")
	one := filepath.Join(root, "whole.parquet")
	convert(t, writeFile(t, root, "whole.csv", whole), one)
	for _, in := range []string{dir, one} {
		mustRun(t, "encode", in, "--target", "late", "--columns", "postcode,sender", "--out", in+".out.parquet", "--tables", in+".tables")
	}
	a, b := readTable(t, dir+".out.parquet"), readTable(t, one+".out.parquet")
	if fmt.Sprint(a.names) != fmt.Sprint(b.names) || fmt.Sprint(a.rows) != fmt.Sprint(b.rows) {
		t.Fatalf("the outputs differ: %v and %v", a.names, b.names)
	}
	// 8 parts, the second empty: 7 row groups of rows, and the empty
	// part's none.
	if n := len(footer(t, dir+".out.parquet").RowGroups); n != 7 {
		t.Errorf("%d row groups, want the parts' 7", n)
	}
}

// TestDatasetFolderKeys: hive-style key=value folders become text columns
// of the table, kept in the output, nulls where the folder says so; engine
// files (_SUCCESS, .crc) are skipped.
func TestDatasetFolderKeys(t *testing.T) {
	root := t.TempDir()
	csv := shipmentsCSV(40)
	lines := strings.SplitAfter(csv, "\n")
	header := lines[0]
	for i, region := range []string{"north", "south%2Feast", "__HIVE_DEFAULT_PARTITION__"} {
		d := filepath.Join(root, "ds", "region="+region)
		if err := os.MkdirAll(d, 0o755); err != nil {
			t.Fatal(err)
		}
		writeFile(t, d, "part-0.csv", header+strings.Join(lines[1+i*13:1+(i+1)*13], ""))
		writeFile(t, d, ".part-0.csv.crc", "not a table")
	}
	writeFile(t, filepath.Join(root, "ds"), "_SUCCESS", "")
	out := filepath.Join(root, "out.csv")
	mustRun(t, "encode", filepath.Join(root, "ds"), "--target", "late", "--columns", "postcode,region", "--folds", "2", "--out", out, "--tables", filepath.Join(root, "t"))
	tt := readTable(t, out)
	reg := tt.col(t, "region")
	// Files in path order: region=__HIVE_DEFAULT_PARTITION__ sorts first.
	if len(reg) != 39 || reg[0] != nullCell || reg[13] != "north" || reg[38] != "south/east" {
		t.Errorf("region column: %d rows, %q %q %q", len(reg), reg[0], reg[13], reg[38])
	}
}

// TestDatasetRefusals: an output among the dataset's files, parts whose
// columns differ, and an empty directory are refused with one line naming
// the file and the column.
func TestDatasetRefusals(t *testing.T) {
	root := t.TempDir()
	dir := writeShards(t, filepath.Join(root, "parts"), shipmentsCSV(60), 3, "csv")
	r := runCLI(t, "encode", dir, "--target", "late", "--columns", "postcode", "--out", filepath.Join(dir, "enc.csv"), "--tables", filepath.Join(root, "t"))
	if r.code != exitUsage || !strings.Contains(r.stderr, "among its files") {
		t.Errorf("--out inside the dataset: exit %d, %q", r.code, r.stderr)
	}
	r = runCLI(t, "encode", filepath.Join(dir, "part-*.csv"), "--target", "late", "--columns", "postcode", "--out", filepath.Join(dir, "part-out.csv"), "--tables", filepath.Join(root, "t"))
	if r.code != exitUsage || !strings.Contains(r.stderr, "among its files") {
		t.Errorf("--out matching the pattern: exit %d, %q", r.code, r.stderr)
	}
	r = runCLI(t, "encode", dir, "--target", "late", "--columns", "postcode", "--out", filepath.Join(root, "o.csv"), "--tables", filepath.Join(dir, "t"))
	if r.code != exitUsage || !strings.Contains(r.stderr, "inside the input") {
		t.Errorf("--tables inside the dataset: exit %d, %q", r.code, r.stderr)
	}
	odd := filepath.Join(dir, "part-00009.csv")
	writeFile(t, dir, "part-00009.csv", "postcode,sender,route,parcel_type,late,cost\nPC1,ACC-1,R1,small,yes,3.5\n")
	r = runCLI(t, "scan", dir)
	if r.code != exitInput || !strings.Contains(r.stderr, odd) || !strings.Contains(r.stderr, "late") || strings.Count(strings.TrimSpace(r.stderr), "\n") != 0 {
		t.Errorf("a part whose column is text: exit %d, %q", r.code, r.stderr)
	}
	// A ragged row makes the part infer other kinds: the row is named,
	// not the kinds.
	os.Remove(odd)
	writeFile(t, dir, "part-00009.csv", "postcode,sender,route,parcel_type,late,cost\nPC1,ACC-1,R1,small,1,3.5,9\n")
	r = runCLI(t, "scan", dir)
	if r.code != exitData || !strings.Contains(r.stderr, odd+":2: 7 fields, header has 6") {
		t.Errorf("a ragged part: exit %d, %q", r.code, r.stderr)
	}
	// A bad value found past the readers (a target beyond the bound) is
	// named by its part and its row there, not the row across the parts.
	far := filepath.Join(root, "far")
	os.MkdirAll(far, 0o755)
	writeFile(t, far, "part-0.csv", "pc,cost\nA,1.5\nB,2.25\nC,1\n")
	writeFile(t, far, "part-1.csv", "pc,cost\nA,3.5\nB,1e200\n")
	r = runCLI(t, "encode", far, "--target", "cost", "--columns", "pc", "--out", filepath.Join(root, "far.csv"), "--tables", filepath.Join(root, "far-t"))
	if want := filepath.Join(far, "part-1.csv") + `: row 2: column "cost"`; r.code != exitData || !strings.Contains(r.stderr, want) {
		t.Errorf("a target out of bounds in a part: exit %d, %q; want %q", r.code, r.stderr, want)
	}
	empty := filepath.Join(root, "empty")
	os.MkdirAll(filepath.Join(empty, "_temporary"), 0o755)
	r = runCLI(t, "scan", empty)
	if r.code == exitOK || !strings.Contains(r.stderr, "no table files") {
		t.Errorf("an empty dataset: exit %d, %q", r.code, r.stderr)
	}
	_ = table.ErrEmpty
}
