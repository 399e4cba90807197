package atomicfile

import (
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
