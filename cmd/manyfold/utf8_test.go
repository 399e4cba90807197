package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// latin1CSV has a Latin-1 "è" (byte 0xe8) in the city of line 3.
const latin1CSV = "postcode,city,late\nPC1,Bern,1\nPC2,Gen\xe8ve,0\nPC1,Basel,1\nPC3,Bern,0\n"

// TestInvalidUTF8 checks the policy on text that is not UTF-8: Parquet
// and Arrow outputs refuse it (exit 4, naming the input, the line and the
// column, or the column's position for a name); a CSV output keeps the
// bytes as they are.
func TestInvalidUTF8(t *testing.T) {
	enc := func(dir, in, out string) []string {
		return []string{"encode", in, "--target", "late", "--columns", "postcode", "--folds", "2", "--out", filepath.Join(dir, "out", out), "--tables", filepath.Join(dir, "out", "tables")}
	}
	cases := []badCase{
		{"value to Parquet", func(t *testing.T, dir string) []string {
			return enc(dir, csvWith(latin1CSV)(t, dir), "enc.parquet")
		}, exitData, []string{"shipments.csv:3: ", `column "city"`, `"Gen\xe8ve" is not valid UTF-8`, "a CSV output keeps the bytes"}},
		{"value to Arrow", func(t *testing.T, dir string) []string {
			return enc(dir, csvWith(latin1CSV)(t, dir), "enc.arrow")
		}, exitData, []string{"shipments.csv:3: ", `column "city"`, "not valid UTF-8"}},
		{"apply to Parquet", func(t *testing.T, dir string) []string {
			tables := fitTables(t, dir, "postcode,city,late\nPC1,Bern,1\nPC2,Basel,0\n", "--target", "late", "--columns", "postcode")
			in := writeFile(t, dir, "new.csv", "postcode,city,late\nPC1,Bern,1\nPC9,Z\xfcrich,1\n")
			return []string{"apply", in, "--tables", tables, "--out", filepath.Join(dir, "out", "applied.parquet")}
		}, exitData, []string{"new.csv:3: ", `column "city"`, "not valid UTF-8"}},
		{"column name to Parquet", func(t *testing.T, dir string) []string {
			return enc(dir, csvWith("postcode,st\xe4dt,late\nPC1,Bern,1\nPC2,Basel,0\n")(t, dir), "enc.parquet")
		}, exitData, []string{"shipments.csv: ", `output column 2: its name "st\xe4dt" is not valid UTF-8`}},
		{"encoded column's name to Arrow", func(t *testing.T, dir string) []string {
			in := csvWith("p\xf6stcode,late\nPC1,1\nPC2,0\n")(t, dir)
			return []string{"encode", in, "--target", "late", "--columns", "p\xf6stcode", "--keep", "late", "--folds", "2", "--out", filepath.Join(dir, "out", "enc.arrow"), "--tables", filepath.Join(dir, "out", "tables")}
		}, exitData, []string{"shipments.csv: ", `output column 2: its name "p\xf6stcode_tmean" is not valid UTF-8`}},
	}
	runBad(t, cases)

	// A CSV output keeps the bytes, and so do the mapping tables of a
	// column whose levels are not UTF-8.
	dir := t.TempDir()
	in := writeFile(t, dir, "shipments.csv", latin1CSV)
	out := filepath.Join(dir, "enc.csv")
	mustRun(t, "encode", in, "--target", "late", "--columns", "postcode,city", "--methods", "target:eb+freq", "--folds", "2", "--out", out, "--tables", filepath.Join(dir, "tables"))
	applied := filepath.Join(dir, "applied.csv")
	mustRun(t, "apply", in, "--tables", filepath.Join(dir, "tables"), "--out", applied)
	if got := readTable(t, applied).col(t, "city_freq"); got[1] != "1" || got[0] != "2" {
		t.Fatalf("apply: city_freq %v, want the Latin-1 level counted once", got)
	}
	b, err := os.ReadFile(out)
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(string(b), ",Gen\xe8ve,") {
		t.Fatalf("CSV output lost the Latin-1 bytes:\n%q", b)
	}
}
