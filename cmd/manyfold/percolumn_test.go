package main

import (
	"bytes"
	"encoding/csv"
	"os"
	"path/filepath"
	"slices"
	"testing"

	"manyfold/internal/parcels"
)

// TestPerColumnEqualsSeparateRuns: one run with a list of encodings per
// column writes, column by column, the bytes of separate runs that encode
// one column each: every encoded output column holds the same text, and
// every column's mapping table is the same file.
func TestPerColumnEqualsSeparateRuns(t *testing.T) {
	dir := t.TempDir()
	in := filepath.Join(dir, "shipments.csv")
	if err := generate(in, parcels.Config{Rows: 8000, Seed: 9, Postcodes: 900, Accounts: 2000}); err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		target string
		parts  []part
	}{
		{"late", []part{
			{"dest_postcode", "target:m=20+freq:share"},
			{"sender_account", "woe+hash:64:signed"},
			{"parcel_type", "topk:6+onehot:6"},
			{"route", "target:eb:prior=prefix3"},
		}},
		// A regression target, the first column without it.
		{"cost", []part{
			{"parcel_type", "topk:6"},
			{"dest_postcode", "target:m=20+freq"},
			{"route", "target:eb:prior=prefix3"},
		}},
	} {
		t.Run(tc.target, func(t *testing.T) { perColumnCase(t, dir, in, tc.target, tc.parts) })
	}
}

// perColumnCase compares one per-column run with one run per column.
func perColumnCase(t *testing.T, dir, in, target string, parts []part) {
	dir = filepath.Join(dir, target)
	if err := os.MkdirAll(dir, 0o755); err != nil {
		t.Fatal(err)
	}
	var plan string
	for i, p := range parts {
		if i > 0 {
			plan += ","
		}
		plan += p.col + "=" + p.methods
	}
	all := filepath.Join(dir, "all")
	mustRun(t, "encode", in, "--target", target, "--methods", plan, "--seed", "4", "--out", all+".csv", "--tables", all)
	whole := readCSVRows(t, all+".csv")
	for i, p := range parts {
		one := filepath.Join(dir, p.col)
		mustRun(t, "encode", in, "--target", target, "--columns", p.col, "--methods", p.methods, "--seed", "4", "--out", one+".csv", "--tables", one)
		sep := readCSVRows(t, one+".csv")
		n := 0
		for j, name := range sep[0] {
			if slices.Contains(whole[0], name) && !isInput(name) {
				k := slices.Index(whole[0], name)
				for r := range sep {
					if sep[r][j] != whole[r][k] {
						t.Fatalf("%s, row %d: %q alone, %q in the per-column run", name, r, sep[r][j], whole[r][k])
					}
				}
				n++
			} else if !isInput(name) {
				t.Fatalf("column %s of the separate run is missing from the per-column run", name)
			}
		}
		if n == 0 {
			t.Fatalf("%s: no encoded column compared", p.col)
		}
		a, err := os.ReadFile(filepath.Join(all, tableName(i+1, p.col)))
		if err != nil {
			t.Fatal(err)
		}
		b, err := os.ReadFile(filepath.Join(one, tableName(1, p.col)))
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(a, b) {
			t.Errorf("%s: the mapping tables differ", p.col)
		}
	}
}

// part is one column and its encodings.
type part struct{ col, methods string }

// isInput reports whether name is a column of the generated input.
func isInput(name string) bool { return parcels.Schema().Index(name) >= 0 }

// tableName is the file name of the i-th column's mapping table.
func tableName(i int, col string) string {
	return string(rune('0'+i/10)) + string(rune('0'+i%10)) + "-" + col + ".parquet"
}

// readCSVRows reads a CSV file whole.
func readCSVRows(t *testing.T, path string) [][]string {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	return rows
}
