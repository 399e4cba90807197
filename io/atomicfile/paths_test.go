package atomicfile

import (
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
)

// TestPathsInReview: cases found in review of the in-place rules.
// /dev/stdout is standard output itself (re-opening it truncated the file
// a shell's ">>" had opened); a dangling symbolic link as the target keeps
// the link and creates the file it names; a new file under /dev (tmpfs at
// /dev/shm) is created by the usual temporary file and rename.
func TestPathsInReview(t *testing.T) {
	for _, p := range []string{"/dev/stdout", "/dev/fd/1", "/proc/self/fd/1"} {
		f, err := Create(p)
		if err != nil {
			t.Fatal(err)
		}
		if f.File != os.Stdout || !f.inPlace {
			t.Errorf("%s: not standard output itself", p)
		}
		if err := f.Commit(); err != nil {
			t.Fatal(err)
		}
	}

	dir := t.TempDir()
	link := filepath.Join(dir, "out.csv")
	if err := os.Symlink("missing.csv", link); err != nil {
		t.Fatal(err)
	}
	f, err := Create(link)
	if err != nil {
		t.Fatal(err)
	}
	f.Write([]byte("a\n"))
	if err := f.Commit(); err != nil {
		t.Fatal(err)
	}
	if fi, err := os.Lstat(link); err != nil || fi.Mode()&os.ModeSymlink == 0 {
		t.Errorf("the link %s was replaced by a file", link)
	}
	if b, err := os.ReadFile(filepath.Join(dir, "missing.csv")); err != nil || string(b) != "a\n" {
		t.Errorf("the file the link names holds %q, %v", b, err)
	}

	if fi, err := os.Stat("/dev/shm"); err == nil && fi.IsDir() {
		p := filepath.Join("/dev/shm", filepath.Base(dir)+".csv")
		defer os.Remove(p)
		f, err := Create(p)
		if err != nil {
			t.Fatalf("a new file under /dev/shm: %v", err)
		}
		f.Write([]byte("b\n"))
		if err := f.Commit(); err != nil {
			t.Fatal(err)
		}
		if b, _ := os.ReadFile(p); string(b) != "b\n" {
			t.Errorf("%s holds %q", p, b)
		}
	}
}

// TestSetgidKept: a group-shared directory (setgid) replaced whole stays
// setgid, so that files made in it later keep its group.
func TestSetgidKept(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "tables")
	if err := os.Mkdir(dir, 0o775); err != nil {
		t.Fatal(err)
	}
	if err := os.Chmod(dir, 0o775|os.ModeSetgid); err != nil {
		t.Fatal(err)
	}
	d, err := CreateDir(dir, nil)
	if err != nil {
		t.Fatal(err)
	}
	if err := d.Commit(); err != nil {
		t.Fatal(err)
	}
	fi, err := os.Stat(dir)
	if err != nil {
		t.Fatal(err)
	}
	if fi.Mode()&os.ModeSetgid == 0 || fi.Mode().Perm() != 0o775 {
		t.Errorf("replaced directory mode %v, want setgid and 0775", fi.Mode())
	}
}

// TestCommitAllChecksTablesFirst: when the tables directory cannot be put
// in place (here its path is a dangling link), CommitAll refuses before it
// renames the output, so neither is left: they are one unit. The check was
// made only after the output was in place.
func TestCommitAllChecksTablesFirst(t *testing.T) {
	dir := t.TempDir()
	tables := filepath.Join(dir, "tables")
	if err := os.Symlink("gone", tables); err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(dir, "out.csv")
	f, err := Create(out)
	if err != nil {
		t.Fatal(err)
	}
	f.Write([]byte("a\n"))
	d, err := CreateDir(tables, nil)
	if err != nil {
		t.Fatal(err)
	}
	if err := CommitAll(f, d); err == nil {
		t.Fatal("CommitAll put a directory in place of a dangling link")
	}
	if _, err := os.Stat(out); err == nil {
		t.Errorf("the output was committed although its tables were not")
	}
}

// TestCreateTempTracked: a scratch file is tracked from its creation (so
// a signal's Cleanup removes it) and Remove removes and forgets it.
func TestCreateTempTracked(t *testing.T) {
	dir := t.TempDir()
	f, err := CreateTemp(dir, "scratch-")
	if err != nil {
		t.Fatal(err)
	}
	f.Close()
	name := f.Name()
	if filepath.Dir(name) != dir || !strings.HasPrefix(filepath.Base(name), "scratch-") || !slices.Contains(Tracked(), name) {
		t.Fatalf("%s: want a tracked file scratch-* in %s (tracked: %v)", name, dir, Tracked())
	}
	Remove(name)
	if _, err := os.Stat(name); !os.IsNotExist(err) || slices.Contains(Tracked(), name) {
		t.Errorf("%s after Remove: %v, tracked %v", name, err, slices.Contains(Tracked(), name))
	}
}
