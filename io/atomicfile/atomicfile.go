// Package atomicfile writes a file so that it appears at its path only when
// complete: data goes to a temporary file in the same directory, which
// Commit renames into place and Abort removes. Dir does the same for a
// whole directory of files.
//
// A target that exists and is not a regular file (a FIFO, a terminal,
// /dev/null), and any path under /dev or /proc (/dev/stdout), is written
// in place instead: renaming over it would replace a device with a file.
// Standard output is written in place (Stdout).
//
// New files get the permissions os.Create gives (0666 less the umask); a
// file that replaces an existing regular file keeps that file's
// permissions. Temporary files are named ".NAME.tmp-*" beside the target;
// every temporary path is tracked (see Track) so that Cleanup can remove
// it when the run is stopped.
package atomicfile

import (
	"errors"
	"fmt"
	"io/fs"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"syscall"

	"manyfold/internal/guard"
)

// errClosed is the error of a commit after Cleanup.
var errClosed = errors.New("the run is stopping; output not committed")

// File is an output file in progress. It implements io.Writer.
//
// As bytes are written, File asks the system to start writing them to
// disk (on Linux, sync_file_range with SYNC_FILE_RANGE_WRITE, every
// writebackEvery bytes), without waiting: by the time Commit syncs the
// file, most of it is on disk already, so the sync that makes the commit
// durable waits for the last few megabytes instead of the whole file.
type File struct {
	*os.File
	path    string // the final path, as the user gave it
	target  string // the path renamed over (symlinks resolved); "" in place
	tmp     string // the temporary file; "" in place
	inPlace bool   // written straight to its target
	keep    bool   // in place on a file this package did not open (stdout): not closed
	ready   bool   // synced and closed
	done    bool   // committed or aborted
	written int64  // bytes written
	flushed int64  // bytes handed to the system's write-back
}

// writebackEvery is how many bytes File writes between two requests to
// start write-back.
const writebackEvery = 8 << 20

// Write writes b to the file.
func (f *File) Write(b []byte) (int, error) {
	n, err := f.File.Write(b)
	f.written += int64(n)
	if !f.inPlace && f.written-f.flushed >= writebackEvery {
		startWriteback(f.File, f.flushed, f.written-f.flushed)
		f.flushed = f.written
	}
	return n, err
}

// Create opens a temporary file beside path, or path itself when it is
// written in place (see the package comment). The directory must exist.
//
// /dev/stdout, /dev/fd/1 and /proc/self/fd/1 are standard output itself
// (Stdout), written at its offset, so that a shell's ">> log" appends; a
// target that exists and is not a regular file (a FIFO, a device), or a
// symbolic link under /dev or /proc, is written in place; a symbolic link
// elsewhere is resolved, even when the file it names does not exist yet,
// and that file is replaced.
func Create(path string) (*File, error) {
	if isStdout(path) {
		f := Stdout()
		f.path = path
		return f, nil
	}
	fi, err := os.Stat(path)
	switch {
	case err == nil && fi.IsDir():
		return nil, fmt.Errorf("create %s: is a directory", path)
	case err == nil && !fi.Mode().IsRegular():
		return openInPlace(path)
	case isSystemPath(path) && isSymlink(path):
		return openInPlace(path)
	}
	target := path
	perm := os.FileMode(0o666) // less the umask, by the system
	keepPerm := false
	if err == nil {
		// Replace the file a symbolic link points to, not the link.
		if t, err := filepath.EvalSymlinks(path); err == nil {
			target = t
		}
		perm, keepPerm = fi.Mode()&keptMode, true
	} else if t, ok := danglingTarget(path); ok {
		target = t
	}
	dir, base := filepath.Split(target)
	if dir == "" {
		dir = "."
	}
	f, tmp, err := createTemp(dir, "."+base+".tmp-", perm)
	if err != nil {
		return nil, fmt.Errorf("create %s: %w", path, unwrapPath(err))
	}
	if keepPerm {
		// The umask applied at creation: set the old file's bits exactly.
		if err := f.Chmod(perm); err != nil {
			f.Close()
			Remove(tmp)
			return nil, fmt.Errorf("create %s: %w", path, err)
		}
	}
	return &File{File: f, path: path, target: target, tmp: tmp}, nil
}

// keptMode are the bits of a replaced file's or directory's mode that its
// replacement keeps: the permissions, and setgid and sticky (a group-shared
// tables directory stays group-shared).
const keptMode = os.ModePerm | os.ModeSetgid | os.ModeSticky

// isStdout reports whether path names this process's standard output.
func isStdout(path string) bool {
	switch filepath.Clean(path) {
	case "/dev/stdout", "/dev/fd/1", "/proc/self/fd/1":
		return true
	}
	return false
}

// isSymlink reports whether path itself is a symbolic link.
func isSymlink(path string) bool {
	fi, err := os.Lstat(path)
	return err == nil && fi.Mode()&os.ModeSymlink != 0
}

// danglingTarget returns the path that the symbolic link path names when
// that file does not exist (yet), so that the file is created there and
// the link kept.
func danglingTarget(path string) (string, bool) {
	if !isSymlink(path) {
		return "", false
	}
	t, err := os.Readlink(path)
	if err != nil {
		return "", false
	}
	if !filepath.IsAbs(t) {
		t = filepath.Join(filepath.Dir(path), t)
	}
	return t, true
}

// Stdout returns a File that writes to standard output, in place; Commit
// and Abort leave it open. Errors name it "stdout".
func Stdout() *File {
	return &File{File: os.Stdout, path: "stdout", inPlace: true, keep: true}
}

// isSystemPath reports whether path lies under /dev or /proc, where a name
// may stand for another file (/dev/stdout, /proc/self/fd/1) and must never
// be renamed over.
func isSystemPath(path string) bool {
	abs, err := filepath.Abs(path)
	if err != nil {
		return false
	}
	return strings.HasPrefix(abs, "/dev/") || strings.HasPrefix(abs, "/proc/")
}

// openInPlace opens an existing target that is written in place: a FIFO
// or a device as it is; a link under /dev or /proc to a regular file (a
// descriptor the shell opened) at its end, never truncated, as other
// output may share it.
func openInPlace(path string) (*File, error) {
	flag := os.O_WRONLY
	if fi, err := os.Stat(path); err == nil && fi.Mode().IsRegular() {
		flag |= os.O_APPEND
	}
	f, err := os.OpenFile(path, flag, 0)
	if err != nil {
		return nil, fmt.Errorf("create %s: %w", path, err)
	}
	return &File{File: f, path: path, inPlace: true}, nil
}

// unwrapPath returns the cause of an error about a temporary path, so that
// messages name the path the user gave, not the temporary one.
func unwrapPath(err error) error {
	var pe *fs.PathError
	if errors.As(err, &pe) {
		return pe.Err
	}
	return err
}

// CreateTemp creates a new file named prefix plus a random suffix in dir
// (the system's temporary directory when dir is ""), tracked, so that
// Cleanup removes it if a signal stops the run: a scratch file, such as a
// copy of standard input, that is removed with Remove when done.
func CreateTemp(dir, prefix string) (*os.File, error) {
	if dir == "" {
		dir = os.TempDir()
	}
	f, _, err := createTemp(dir, prefix, 0o600)
	return f, err
}

// createTemp creates a new file named prefix plus a random suffix in dir
// with permissions perm (less the umask), and tracks it. The file is
// created and tracked under the registry's lock, so that a signal's
// Cleanup either finds it tracked or runs before it exists.
func createTemp(dir, prefix string, perm os.FileMode) (*os.File, string, error) {
	for try := 0; ; try++ {
		name := filepath.Join(dir, prefix+randomSuffix())
		var f *os.File
		err := commitLock(func() error {
			var err error
			if f, err = os.OpenFile(name, os.O_RDWR|os.O_CREATE|os.O_EXCL, perm); err == nil {
				trackLocked(name)
			}
			return err
		})
		if errors.Is(err, os.ErrExist) && try < 100 {
			continue
		}
		if err != nil {
			return nil, "", err
		}
		return f, name, nil
	}
}

// randomSuffix returns the random part of a temporary name.
func randomSuffix() string { return strconv.FormatUint(uint64(rand.Uint32()), 10) }

// Name returns the final path, so that writers which name their file in
// errors name the file the user asked for, not the temporary one.
func (f *File) Name() string { return f.path }

// Path returns the final path the file will have after Commit.
func (f *File) Path() string { return f.path }

// Ready syncs and closes the temporary file, so that all that Commit has
// left to do is the rename. Committing several outputs as one (CommitAll)
// makes them all ready before any is renamed.
func (f *File) Ready() error {
	if f.ready || f.done {
		return nil
	}
	f.ready = true
	if err := f.File.Sync(); err != nil && !(f.inPlace && errors.Is(err, syscall.EINVAL)) {
		// A pipe or a terminal cannot be synced (EINVAL); a file can.
		f.closeFile()
		f.discard()
		return fmt.Errorf("write %s: %w", f.path, err)
	}
	if err := f.closeFile(); err != nil {
		f.discard()
		return fmt.Errorf("write %s: %w", f.path, err)
	}
	return nil
}

func (f *File) closeFile() error {
	if f.keep {
		return nil
	}
	return f.File.Close()
}

// discard marks the file done and removes the temporary file.
func (f *File) discard() {
	f.done = true
	if f.tmp != "" {
		Remove(f.tmp)
	}
}

// Commit syncs (see File) and closes the temporary file and renames it to
// the final path; the directory is synced so that the rename lasts. After
// Commit, Abort does nothing. Nothing is committed after a panic on a
// goroutine that nobody waited for (guard.Go).
func (f *File) Commit() error {
	if f.done {
		return nil
	}
	if err := guard.Err(); err != nil {
		f.Abort()
		return err
	}
	if err := f.Ready(); err != nil {
		return err
	}
	f.done = true
	if f.inPlace {
		return nil
	}
	err := commitLock(func() error {
		if err := os.Rename(f.tmp, f.target); err != nil {
			return unwrapPath(err)
		}
		untrackLocked(f.tmp)
		return nil
	})
	if err != nil {
		Remove(f.tmp)
		return fmt.Errorf("write %s: %w", f.path, err)
	}
	syncDir(filepath.Dir(f.target))
	return nil
}

// Abort closes and removes the temporary file, leaving the final path as
// it was (a target written in place keeps what was written). It is safe to
// call after Commit or more than once.
func (f *File) Abort() {
	if f.done {
		return
	}
	if !f.ready {
		f.closeFile()
	}
	f.discard()
}

// syncDir syncs a directory, so that the names just made or renamed in
// it survive a crash. It is best effort: some file systems cannot sync a
// directory, and the rename has happened either way.
func syncDir(dir string) error {
	d, err := os.Open(dir)
	if err != nil {
		return err
	}
	defer d.Close()
	if err := d.Sync(); err != nil && !errors.Is(err, syscall.EINVAL) && !errors.Is(err, syscall.ENOTSUP) {
		return err
	}
	return nil
}

// Output is an output that can be made ready (complete and durable, not
// yet in place), committed (moved into place) or aborted: a File, a Dir,
// or a table writer over a File.
type Output interface {
	Ready() error
	Commit() error
	Abort()
}

// CommitAll commits outputs as one: it makes them all ready first, and
// only when every one is, commits them in order; if one cannot be made
// ready, all are aborted and none is moved. A failure of a later commit
// (a rename, which seldom fails once the data is on disk) leaves the
// earlier outputs committed and aborts the rest.
func CommitAll(outs ...Output) error {
	if err := guard.Err(); err != nil {
		abortAll(outs)
		return err
	}
	for _, o := range outs {
		if err := o.Ready(); err != nil {
			abortAll(outs)
			return err
		}
	}
	unitMu.Lock()
	defer unitMu.Unlock()
	for i, o := range outs {
		if err := o.Commit(); err != nil {
			abortAll(outs[i+1:])
			return err
		}
	}
	return nil
}

func abortAll(outs []Output) {
	for _, o := range outs {
		o.Abort()
	}
}
