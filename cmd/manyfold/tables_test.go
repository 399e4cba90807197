package main

import (
	"encoding/json"
	"os"
	"path/filepath"
	"testing"
)

// TestDamagedTables: apply and merge refuse a damaged tables directory
// with exit code 6 and a message naming the field or file.
func TestDamagedTables(t *testing.T) {
	fresh := "postcode,sender\nPC1,ACC-9\nPC7,ACC-1\n"
	apply := func(edit func(t *testing.T, tables string)) func(t *testing.T, dir string) []string {
		return func(t *testing.T, dir string) []string {
			tables := fitTables(t, dir, goodCSV, "--columns", "postcode,sender", "--methods", "target:eb+hash")
			edit(t, tables)
			return []string{"apply", writeFile(t, dir, "new.csv", fresh), "--tables", tables, "--out", filepath.Join(dir, "out", "new.csv")}
		}
	}
	cases := []badCase{
		{"buckets 0", apply(func(t *testing.T, tables string) {
			m := readManifest(t, tables)
			encoding(t, m, 0, 1)["encoding"] = "hash:0"
			writeManifest(t, tables, m)
		}), exitMismatch, []string{"manifest.json", "columns[0].encodings[1]", `B "0"`}},
		{"table outside the directory", apply(func(t *testing.T, tables string) {
			m := readManifest(t, tables)
			m["columns"].([]any)[0].(map[string]any)["table"] = "../train.csv"
			writeManifest(t, tables, m)
		}), exitMismatch, []string{"manifest.json", "columns[0].table", "not a plain file name"}},
		{"table replaced by a CSV", apply(func(t *testing.T, tables string) {
			writeFile(t, tables, "01-postcode.parquet", "level,rows\nPC1,2\n")
		}), exitMismatch, []string{"01-postcode.parquet", "checksum"}},
		{"table missing", apply(func(t *testing.T, tables string) {
			os.Remove(filepath.Join(tables, "02-sender.parquet"))
		}), exitMismatch, []string{"02-sender.parquet", "missing"}},
		{"merge of a damaged shard", func(t *testing.T, dir string) []string {
			a := fitTables(t, dir, goodCSV, "--columns", "postcode")
			b := filepath.Join(dir, "b")
			os.Rename(a, b)
			a = fitTables(t, dir, goodCSV, "--columns", "postcode")
			m := readManifest(t, b)
			encoding(t, m, 0, 0)["fit"].(map[string]any)["prior"] = []any{}
			writeManifest(t, b, m)
			return []string{"merge", a, b, "--tables", filepath.Join(dir, "out", "merged")}
		}, exitMismatch, []string{"manifest.json", "columns[0].encodings[0].fit: prior has 0 values"}},
	}
	runBad(t, cases)
}

// encoding returns the manifest's entry columns[col].encodings[enc].
func encoding(t *testing.T, m map[string]any, col, enc int) map[string]any {
	t.Helper()
	e, ok := m["columns"].([]any)[col].(map[string]any)["encodings"].([]any)[enc].(map[string]any)
	if !ok {
		t.Fatalf("manifest has no columns[%d].encodings[%d]", col, enc)
	}
	return e
}

// writeManifest writes m as the manifest of the tables directory.
func writeManifest(t *testing.T, tables string, m map[string]any) {
	t.Helper()
	b, err := json.Marshal(m)
	if err != nil {
		t.Fatal(err)
	}
	writeFile(t, tables, "manifest.json", string(b))
}
