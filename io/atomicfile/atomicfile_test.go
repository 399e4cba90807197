package atomicfile

import (
	"bytes"
	"os"
	"path/filepath"
	"testing"
)

func TestCommitAndAbort(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "out.csv")
	if err := os.WriteFile(path, []byte("old\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	// Abort leaves the target as it was and no temporary file behind.
	f, err := Create(path)
	if err != nil {
		t.Fatal(err)
	}
	if f.Name() != path || f.Path() != path {
		t.Errorf("Name %q, Path %q, want %q", f.Name(), f.Path(), path)
	}
	f.Write([]byte("half"))
	f.Abort()
	f.Abort() // twice is harmless
	if b, _ := os.ReadFile(path); string(b) != "old\n" {
		t.Errorf("after Abort the target holds %q", b)
	}
	if entries, _ := os.ReadDir(dir); len(entries) != 1 {
		t.Errorf("after Abort the directory holds %d entries", len(entries))
	}
	// Commit replaces the target; Abort afterwards does nothing.
	f, err = Create(path)
	if err != nil {
		t.Fatal(err)
	}
	f.Write([]byte("new\n"))
	if err := f.Commit(); err != nil {
		t.Fatal(err)
	}
	f.Abort()
	if b, _ := os.ReadFile(path); string(b) != "new\n" {
		t.Errorf("after Commit the target holds %q", b)
	}
	if entries, _ := os.ReadDir(dir); len(entries) != 1 {
		t.Errorf("after Commit the directory holds %d entries", len(entries))
	}
}

func TestCreateInMissingDirectory(t *testing.T) {
	if _, err := Create(filepath.Join(t.TempDir(), "missing", "out.csv")); err == nil {
		t.Error("Create in a missing directory succeeded")
	}
}

// TestLargeWrite writes past several write-back requests in pieces of
// uneven size and reads the committed file back whole.
func TestLargeWrite(t *testing.T) {
	path := filepath.Join(t.TempDir(), "out.bin")
	f, err := Create(path)
	if err != nil {
		t.Fatal(err)
	}
	var want []byte
	piece := make([]byte, 1<<20+7)
	for i := 0; len(want) < 3*writebackEvery+123; i++ {
		for j := range piece {
			piece[j] = byte(i*31 + j)
		}
		p := piece[:len(piece)-i%5]
		n, err := f.Write(p)
		if err != nil || n != len(p) {
			t.Fatalf("Write of %d bytes: %d, %v", len(p), n, err)
		}
		want = append(want, p...)
	}
	if f.flushed == 0 || f.flushed > f.written {
		t.Errorf("after %d bytes, %d handed to write-back", f.written, f.flushed)
	}
	if err := f.Commit(); err != nil {
		t.Fatal(err)
	}
	got, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(got, want) {
		t.Errorf("the committed file has %d bytes, not the %d written", len(got), len(want))
	}
}
