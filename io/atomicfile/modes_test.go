package atomicfile

import (
	"os"
	"path/filepath"
	"slices"
	"strings"
	"syscall"
	"testing"
	"time"
)

// withUmask runs f with the process's umask set to mask. No test of this
// package runs in parallel, so nothing else creates files meanwhile.
func withUmask(mask int, f func()) {
	old := syscall.Umask(mask)
	defer syscall.Umask(old)
	f()
}

func writeCommit(t *testing.T, path, text string) {
	t.Helper()
	f, err := Create(path)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := f.Write([]byte(text)); err != nil {
		t.Fatal(err)
	}
	if err := f.Commit(); err != nil {
		t.Fatal(err)
	}
}

func mode(t *testing.T, path string) os.FileMode {
	t.Helper()
	fi, err := os.Stat(path)
	if err != nil {
		t.Fatal(err)
	}
	return fi.Mode().Perm()
}

// TestModeFollowsUmask: a new file gets 0666 less the umask, as os.Create
// gives; a file that replaces another keeps the old one's permissions.
func TestModeFollowsUmask(t *testing.T) {
	dir := t.TempDir()
	for _, c := range []struct {
		mask int
		want os.FileMode
	}{{0o022, 0o644}, {0o077, 0o600}, {0o002, 0o664}} {
		path := filepath.Join(dir, "new.csv")
		os.Remove(path)
		withUmask(c.mask, func() { writeCommit(t, path, "a\n") })
		if got := mode(t, path); got != c.want {
			t.Errorf("umask %03o: new file mode %03o, want %03o", c.mask, got, c.want)
		}
	}
	// Replacing keeps the old mode, whatever the umask.
	path := filepath.Join(dir, "private.csv")
	if err := os.WriteFile(path, []byte("old\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	os.Chmod(path, 0o600)
	withUmask(0o022, func() { writeCommit(t, path, "new\n") })
	if got := mode(t, path); got != 0o600 {
		t.Errorf("a 0600 file replaced has mode %03o", got)
	}
	os.Chmod(path, 0o664)
	withUmask(0o077, func() { writeCommit(t, path, "newer\n") })
	if got := mode(t, path); got != 0o664 {
		t.Errorf("a 0664 file replaced under umask 077 has mode %03o", got)
	}
}

// TestFIFOWrittenInPlace: a target that exists and is not a regular file
// is written to, never renamed over.
func TestFIFOWrittenInPlace(t *testing.T) {
	dir := t.TempDir()
	fifo := filepath.Join(dir, "pipe")
	if err := syscall.Mkfifo(fifo, 0o600); err != nil {
		t.Skip("no FIFOs here:", err)
	}
	got := make(chan string, 1)
	go func() {
		b, _ := os.ReadFile(fifo) // opens for reading, so Create's open returns
		got <- string(b)
	}()
	writeCommit(t, fifo, "through the pipe\n")
	if s := <-got; s != "through the pipe\n" {
		t.Errorf("the reader got %q", s)
	}
	fi, err := os.Lstat(fifo)
	if err != nil || fi.Mode()&os.ModeNamedPipe == 0 {
		t.Fatalf("the FIFO was replaced: %v, %v", fi.Mode(), err)
	}
	if es, _ := os.ReadDir(dir); len(es) != 1 {
		t.Errorf("the directory holds %d entries", len(es))
	}
	if len(Tracked()) != 0 {
		t.Errorf("paths still tracked: %v", Tracked())
	}
}

// TestSymlinkTargetReplaced: an output path that is a symbolic link
// replaces the file the link points to; the link stays a link.
func TestSymlinkTargetReplaced(t *testing.T) {
	dir := t.TempDir()
	real := filepath.Join(dir, "data", "real.csv")
	os.Mkdir(filepath.Dir(real), 0o755)
	os.WriteFile(real, []byte("old\n"), 0o644)
	link := filepath.Join(dir, "link.csv")
	if err := os.Symlink(real, link); err != nil {
		t.Fatal(err)
	}
	writeCommit(t, link, "new\n")
	if fi, err := os.Lstat(link); err != nil || fi.Mode()&os.ModeSymlink == 0 {
		t.Errorf("the link was replaced by a file")
	}
	if b, _ := os.ReadFile(real); string(b) != "new\n" {
		t.Errorf("the linked file holds %q", b)
	}
}

func TestDevicePathWrittenInPlace(t *testing.T) {
	if !isSystemPath("/dev/stdout") || !isSystemPath("/proc/self/fd/1") || isSystemPath("/tmp/x.csv") {
		t.Error("isSystemPath")
	}
	f, err := Create("/dev/null")
	if err != nil {
		t.Fatal(err)
	}
	if !f.inPlace || f.tmp != "" {
		t.Fatalf("/dev/null is not written in place")
	}
	f.Write([]byte("x"))
	if err := f.Commit(); err != nil {
		t.Fatal(err)
	}
	if fi, err := os.Stat("/dev/null"); err != nil || fi.Mode()&os.ModeCharDevice == 0 {
		t.Fatalf("/dev/null is no longer a device: %v %v", fi.Mode(), err)
	}
}

func TestCleanupRemovesTracked(t *testing.T) {
	defer func() { registry.mu.Lock(); registry.closed = false; registry.mu.Unlock() }()
	dir := t.TempDir()
	f, err := Create(filepath.Join(dir, "out.csv"))
	if err != nil {
		t.Fatal(err)
	}
	f.Write([]byte("half"))
	d, err := CreateDir(filepath.Join(dir, "tables"), nil)
	if err != nil {
		t.Fatal(err)
	}
	os.WriteFile(filepath.Join(d.Name(), "a.parquet"), []byte("x"), 0o644)
	if n := len(Tracked()); n != 2 {
		t.Fatalf("%d paths tracked, want 2", n)
	}
	Cleanup()
	if es, _ := os.ReadDir(dir); len(es) != 0 {
		t.Errorf("after Cleanup the directory holds %v", es)
	}
	if err := f.Commit(); err == nil {
		t.Error("Commit after Cleanup succeeded")
	}
	if _, err := Create(filepath.Join(dir, "late.csv")); err == nil {
		t.Error("Create after Cleanup succeeded")
	}
	if es, _ := os.ReadDir(dir); len(es) != 0 {
		t.Errorf("after Cleanup new files appear: %v", es)
	}
}

func names(t *testing.T, dir string) []string {
	t.Helper()
	es, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	var out []string
	for _, e := range es {
		out = append(out, e.Name())
	}
	return out
}

// TestDirSwap: the new directory replaces the old one whole: files of the
// old set that the new lacks are gone, and no staging directory is left.
func TestDirSwap(t *testing.T) {
	parent := t.TempDir()
	path := filepath.Join(parent, "tables")
	stage := func(files ...string) *Dir {
		d, err := CreateDir(path, nil)
		if err != nil {
			t.Fatal(err)
		}
		for _, f := range files {
			if err := os.WriteFile(filepath.Join(d.Name(), f), []byte(f), 0o644); err != nil {
				t.Fatal(err)
			}
		}
		return d
	}
	if err := stage("a", "b", "manifest.json").Commit(); err != nil {
		t.Fatal(err)
	}
	if got := names(t, path); !slices.Equal(got, []string{"a", "b", "manifest.json"}) {
		t.Errorf("first commit: %v", got)
	}
	// Aborted: the old set stays.
	d := stage("c")
	d.Abort()
	if got := names(t, path); !slices.Equal(got, []string{"a", "b", "manifest.json"}) {
		t.Errorf("after Abort: %v", got)
	}
	os.Chmod(path, 0o750)
	if err := stage("c", "manifest.json").Commit(); err != nil {
		t.Fatal(err)
	}
	if got := names(t, path); !slices.Equal(got, []string{"c", "manifest.json"}) {
		t.Errorf("after the swap: %v (the old tables must go)", got)
	}
	if got := mode(t, path); got != 0o750 {
		t.Errorf("the directory's mode %03o, want the old 0750", got)
	}
	if got := names(t, parent); !slices.Equal(got, []string{"tables"}) {
		t.Errorf("the parent holds %v", got)
	}
	// A directory that replace refuses stays as it is.
	d, err := CreateDir(path, func(string) error { return os.ErrPermission })
	if err != nil {
		t.Fatal(err)
	}
	if err := d.Commit(); err == nil {
		t.Error("Commit replaced a directory that replace refused")
	}
	if got := names(t, path); !slices.Equal(got, []string{"c", "manifest.json"}) {
		t.Errorf("after a refused swap: %v", got)
	}
	if got := names(t, parent); !slices.Equal(got, []string{"tables"}) {
		t.Errorf("the parent holds %v", got)
	}
	// A file where the directory should be is refused.
	file := filepath.Join(parent, "file")
	os.WriteFile(file, nil, 0o644)
	if _, err := CreateDir(file, nil); err == nil || !strings.Contains(err.Error(), "not a directory") {
		t.Errorf("CreateDir over a file: %v", err)
	}
}

// TestDirSwapAside checks the swap without the atomic exchange: the old
// directory is renamed aside, then removed.
func TestDirSwapAside(t *testing.T) {
	parent := t.TempDir()
	path := filepath.Join(parent, "t")
	os.Mkdir(path, 0o755)
	os.WriteFile(filepath.Join(path, "old"), nil, 0o644)
	d, err := CreateDir(path, nil)
	if err != nil {
		t.Fatal(err)
	}
	os.WriteFile(filepath.Join(d.Name(), "new"), nil, 0o644)
	exchange = func(a, b string) error { return os.ErrInvalid }
	defer func() { exchange = exchangeDirs }()
	if err := d.Commit(); err != nil {
		t.Fatal(err)
	}
	if got := names(t, path); !slices.Equal(got, []string{"new"}) {
		t.Errorf("after the swap: %v", got)
	}
}

// TestCommitAll: when one output cannot be made ready, none is committed.
func TestCommitAll(t *testing.T) {
	dir := t.TempDir()
	a, _ := Create(filepath.Join(dir, "a.json"))
	b, _ := Create(filepath.Join(dir, "b.html"))
	a.Write([]byte("a"))
	b.Write([]byte("b"))
	b.File.Close() // b's sync will fail
	if err := CommitAll(a, b); err == nil {
		t.Fatal("CommitAll succeeded with a broken output")
	}
	if got := names(t, dir); len(got) != 0 {
		t.Errorf("after a failed CommitAll the directory holds %v", got)
	}
	a, _ = Create(filepath.Join(dir, "a.json"))
	b, _ = Create(filepath.Join(dir, "b.html"))
	if err := CommitAll(a, b); err != nil {
		t.Fatal(err)
	}
	if got := names(t, dir); !slices.Equal(got, []string{"a.json", "b.html"}) {
		t.Errorf("after CommitAll: %v", got)
	}
}

// slowOutput is an Output whose Commit waits to be released.
type slowOutput struct {
	started, release chan struct{}
	committed        bool
}

func (s *slowOutput) Ready() error { return nil }
func (s *slowOutput) Commit() error {
	close(s.started)
	<-s.release
	s.committed = true
	return nil
}
func (s *slowOutput) Abort() {}

// TestCleanupWaitsForCommitAll: a signal's Cleanup does not run between the
// moves of CommitAll, so the outputs are all new or all old.
func TestCleanupWaitsForCommitAll(t *testing.T) {
	defer func() { registry.mu.Lock(); registry.closed = false; registry.mu.Unlock() }()
	dir := t.TempDir()
	a, _ := Create(filepath.Join(dir, "a.csv"))
	s := &slowOutput{started: make(chan struct{}), release: make(chan struct{})}
	d, _ := CreateDir(filepath.Join(dir, "tables"), nil)
	done := make(chan error, 1)
	go func() { done <- CommitAll(a, s, d) }()
	<-s.started
	cleaned := make(chan struct{})
	go func() { Cleanup(); close(cleaned) }()
	select {
	case <-cleaned:
		t.Fatal("Cleanup ran while CommitAll was moving its outputs")
	case <-time.After(50 * time.Millisecond):
	}
	close(s.release)
	if err := <-done; err != nil {
		t.Fatal(err)
	}
	<-cleaned
	if got := names(t, dir); !slices.Equal(got, []string{"a.csv", "tables"}) {
		t.Errorf("after CommitAll and Cleanup: %v", got)
	}
}
