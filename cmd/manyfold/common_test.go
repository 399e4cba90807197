package main

import (
	"os"
	"path/filepath"
	"testing"
)

func TestDiskSize(t *testing.T) {
	dir := t.TempDir()
	write := func(name string, n int) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, make([]byte, n), 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	a := write("a.csv", 1000)
	tables := filepath.Join(dir, "tables")
	if err := os.Mkdir(tables, 0o755); err != nil {
		t.Fatal(err)
	}
	write("tables/x.parquet", 300)
	write("tables/y.parquet", 700)
	if err := os.Mkdir(filepath.Join(tables, "sub"), 0o755); err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		path string
		want int64
	}{
		{a, 1000},
		{tables, 1000}, // its files, not the directory below it
		{filepath.Join(dir, "missing"), 0},
		{"-", 0},
	} {
		if got := diskSize(tc.path); got != tc.want {
			t.Errorf("diskSize(%s) = %d, want %d", tc.path, got, tc.want)
		}
	}
}
