package main

import (
	"fmt"
	"path/filepath"
	"slices"
	"strings"
	"testing"
)

// TestApplyReadsFittedKinds: apply reads the encoded columns of a CSV as
// the kinds the tables were fitted on, not as its own rows suggest. Fitted
// on postcodes with leading zeros (text), a nightly batch whose postcodes
// happen to have none still applies: "501" is a level of its own, unseen
// when only "00501" was fitted, and a fitted level gets its fitted value.
func TestApplyReadsFittedKinds(t *testing.T) {
	dir := t.TempDir()
	var b strings.Builder
	b.WriteString("postcode,late\n")
	pcs := []string{"00501", "01234", "77777"}
	for i := 0; i < 60; i++ {
		late := 0
		if (i%3 == 0 && i%7 != 0) || (i%3 == 2 && i%2 == 0) {
			late = 1
		}
		fmt.Fprintf(&b, "%s,%d\n", pcs[i%3], late)
	}
	train := writeFile(t, dir, "train.csv", b.String())
	tables := filepath.Join(dir, "tables")
	mustRun(t, "encode", train, "--target", "late", "--columns", "postcode", "--methods", "target:eb+freq",
		"--scheme", "none", "--out", filepath.Join(dir, "enc.csv"), "--tables", tables)
	// The full-data values of the fitted levels, and the prior.
	want := map[string][2]string{}
	applied := filepath.Join(dir, "train_applied.csv")
	mustRun(t, "apply", writeFile(t, dir, "probe.csv", "postcode\n00501\n01234\n77777\nQ9\n"), "--tables", tables, "--out", applied)
	tt := readTable(t, applied)
	for i, pc := range tt.col(t, "postcode") {
		want[pc] = [2]string{tt.col(t, "postcode_tmean")[i], tt.col(t, "postcode_freq")[i]}
	}
	prior := want["Q9"]
	if prior == want["00501"] || prior[1] != "0" {
		t.Fatalf("probe values %v: the prior must differ from a fitted level's value", want)
	}

	// No leading zero in the batch: inferred, the column would be int.
	out := filepath.Join(dir, "nightly_encoded.parquet")
	res := runCLI(t, "apply", writeFile(t, dir, "nightly.csv", "postcode\n501\n77777\n1234\n\n501\n"), "--tables", tables, "--out", out)
	if res.code != exitOK {
		t.Fatalf("apply to a batch without leading zeros: exit %d: %s", res.code, res.stderr)
	}
	got := readTable(t, out)
	wantRows := [][2]string{prior, want["77777"], prior, prior, prior}
	pcsGot := got.col(t, "postcode")
	if !slices.Equal(pcsGot, []string{"501", "77777", "1234", nullCell, "501"}) {
		t.Errorf("postcodes written back as %q", pcsGot)
	}
	for i := range wantRows {
		if g := [2]string{got.col(t, "postcode_tmean")[i], got.col(t, "postcode_freq")[i]}; g != wantRows[i] {
			t.Errorf("row %d (%s): tmean, freq %v, want %v", i+1, pcsGot[i], g, wantRows[i])
		}
	}
	if !strings.Contains(res.stderr, "postcode 80.0% unseen") {
		t.Errorf("summary %q, want 4 of 5 rows unseen", res.stderr)
	}
}

// TestApplyFittedKindsDemo: the demo's own apply step reads a CSV of new
// shipments with tables fitted on Parquet; at 10 rows no new postcode need
// have a leading zero.
func TestApplyFittedKindsDemo(t *testing.T) {
	for _, rows := range []string{"10", "12", "40"} {
		res := runCLI(t, "demo", "--rows", rows, "--dir", filepath.Join(t.TempDir(), "demo"))
		if res.code != exitOK {
			t.Errorf("demo --rows %s: exit %d: %s", rows, res.code, res.stderr)
		}
	}
}

// TestBigIntegerIDs: ids beyond int64 stay exact: two distinct values are
// two levels, and the written ids read as the input's text.
func TestBigIntegerIDs(t *testing.T) {
	dir := t.TempDir()
	var b strings.Builder
	b.WriteString("id,late\n")
	ids := []string{"18446744073709551615", "18446744073709551614"}
	for i := 0; i < 20; i++ {
		fmt.Fprintf(&b, "%s,%d\n", ids[i%2], i%2)
	}
	in := writeFile(t, dir, "ids.csv", b.String())
	for _, out := range []string{"enc.parquet", "enc.csv", "enc.arrow"} {
		path := filepath.Join(dir, out)
		res := mustRun(t, "encode", in, "--target", "late", "--columns", "id", "--methods", "freq+target:eb",
			"--folds", "2", "--out", path, "--tables", filepath.Join(dir, "tables_"+out))
		if !strings.Contains(res.stderr, "id 2 levels") {
			t.Errorf("%s: summary %q, want 2 levels", out, res.stderr)
		}
		got := readTable(t, path).col(t, "id")
		for i, v := range got {
			if v != ids[i%2] {
				t.Fatalf("%s: row %d id %q, want %q", out, i+1, v, ids[i%2])
			}
		}
	}
}

// TestCSVEdgeErrors: a field over --max-field-bytes, a NUL byte past the
// first 512 bytes and CR-only line ends are each an error of one line
// naming the file, the line and the column (exit 4); a bad flag value is a
// usage error.
func TestCSVEdgeErrors(t *testing.T) {
	head := "postcode,late\n" + strings.Repeat("PC1,1\nPC2,0\n", 60)
	cases := []struct {
		name, in string
		flags    []string
		code     int
		want     string
	}{
		{"field over the limit", head + "PC" + strings.Repeat("9", 200) + ",1\n", []string{"--max-field-bytes", "100"},
			exitData, `in.csv:122: column "postcode": byte 1: field longer than 100 bytes (the limit; raise it with --max-field-bytes)`},
		{"field at a raised limit", head + "PC" + strings.Repeat("9", 200) + ",1\n", []string{"--max-field-bytes", "202"}, exitOK, ""},
		{"NUL past 512 bytes", head + "PC\x003,1\n", nil,
			exitData, `in.csv:122: column "postcode": byte 3: NUL byte (0x00): the file looks binary, not CSV text`},
		{"CR-only line ends", strings.ReplaceAll(head, "\n", "\r"), nil,
			exitData, `in.csv:1: header field 2 holds a carriage return (CR) that no line feed (LF) follows`},
		{"bad limit", head, []string{"--max-field-bytes", "0"}, exitUsage, "--max-field-bytes 0: want 1 to 1073741824"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			dir := t.TempDir()
			in := writeFile(t, dir, "in.csv", c.in)
			args := append([]string{"encode", in, "--target", "late", "--columns", "postcode", "--folds", "2",
				"--out", filepath.Join(dir, "out.csv"), "--tables", filepath.Join(dir, "tables")}, c.flags...)
			res := runCLI(t, args...)
			if res.code != c.code || !strings.Contains(res.stderr, c.want) {
				t.Errorf("exit %d, %q; want exit %d, %q", res.code, res.stderr, c.code, c.want)
			}
			if c.code != exitOK && strings.Count(strings.TrimSpace(res.stderr), "\n") != 0 {
				t.Errorf("message of more than one line: %q", res.stderr)
			}
		})
	}
}

// TestCSVBoolForcedToEveryFormat: a CSV column of t and f forced to bool
// is written to Parquet, Arrow and CSV alike.
func TestCSVBoolForcedToEveryFormat(t *testing.T) {
	dir := t.TempDir()
	in := writeFile(t, dir, "b.csv", "pc,late,flag\n001,1,t\n002,0,f\n001,1,T\n003,0,F\n")
	for _, out := range []string{"out.parquet", "out.arrow"} {
		path := filepath.Join(dir, out)
		mustRun(t, "encode", in, "--target", "late", "--columns", "pc", "--folds", "2", "--type", "flag=bool",
			"--out", path, "--tables", filepath.Join(dir, "tables_"+out))
		if got := readTable(t, path).col(t, "flag"); !slices.Equal(got, []string{"true", "false", "true", "false"}) {
			t.Errorf("%s: flag %q", out, got)
		}
	}
}
