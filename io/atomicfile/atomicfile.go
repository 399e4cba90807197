// Package atomicfile writes a file so that it appears at its path only when
// complete: data goes to a temporary file in the same directory, which
// Commit renames into place and Abort removes.
package atomicfile

import (
	"fmt"
	"os"
	"path/filepath"
)

// File is an output file in progress. It implements io.Writer.
//
// As bytes are written, File asks the system to start writing them to
// disk (on Linux, sync_file_range with SYNC_FILE_RANGE_WRITE, every
// writebackEvery bytes), without waiting: by the time Commit syncs the
// file, most of it is on disk already, so the sync that makes the commit
// durable waits for the last few megabytes instead of the whole file.
type File struct {
	*os.File
	path    string
	done    bool
	written int64 // bytes written
	flushed int64 // bytes handed to the system's write-back
}

// writebackEvery is how many bytes File writes between two requests to
// start write-back.
const writebackEvery = 8 << 20

// Write writes b to the temporary file.
func (f *File) Write(b []byte) (int, error) {
	n, err := f.File.Write(b)
	f.written += int64(n)
	if f.written-f.flushed >= writebackEvery {
		startWriteback(f.File, f.flushed, f.written-f.flushed)
		f.flushed = f.written
	}
	return n, err
}

// Create opens a temporary file beside path. The directory must exist.
func Create(path string) (*File, error) {
	dir, base := filepath.Split(path)
	if dir == "" {
		dir = "."
	}
	f, err := os.CreateTemp(dir, "."+base+".tmp-*")
	if err != nil {
		return nil, fmt.Errorf("create %s: %w", path, err)
	}
	return &File{File: f, path: path}, nil
}

// Name returns the final path, so that writers which name their file in
// errors name the file the user asked for, not the temporary one.
func (f *File) Name() string { return f.path }

// Path returns the final path the file will have after Commit.
func (f *File) Path() string { return f.path }

// Commit syncs (see File) and closes the temporary file and renames it to the final
// path. After Commit, Abort does nothing.
func (f *File) Commit() error {
	if f.done {
		return nil
	}
	f.done = true
	tmp := f.File.Name()
	if err := f.File.Sync(); err != nil {
		f.File.Close()
		os.Remove(tmp)
		return fmt.Errorf("write %s: %w", f.path, err)
	}
	if err := f.File.Close(); err != nil {
		os.Remove(tmp)
		return fmt.Errorf("write %s: %w", f.path, err)
	}
	if err := os.Chmod(tmp, 0o644); err != nil {
		os.Remove(tmp)
		return fmt.Errorf("write %s: %w", f.path, err)
	}
	if err := os.Rename(tmp, f.path); err != nil {
		os.Remove(tmp)
		return fmt.Errorf("write %s: %w", f.path, err)
	}
	return nil
}

// Abort closes and removes the temporary file, leaving the final path as
// it was. It is safe to call after Commit or more than once.
func (f *File) Abort() {
	if f.done {
		return
	}
	f.done = true
	f.File.Close()
	os.Remove(f.File.Name())
}
