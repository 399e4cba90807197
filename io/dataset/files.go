// Package dataset reads a table stored as many files (the parts a
// distributed engine writes: a directory of part-*.parquet files, maybe in
// hive-style key=value folders, or a glob of them) as one table: the files'
// rows one file after the other, in the order of their paths, with the
// folders' key=value pairs as text columns.
//
// A directory is walked recursively. Files and folders whose names start
// with "_" or "." are skipped: engines keep their markers, logs and
// checksums there (_SUCCESS, _delta_log, .part-00000.crc; common practice,
// not a standard). A folder named key=value gives every file beneath it a
// column key holding value, unescaped from the URL-style escapes engines
// write (%2F for a slash); the value __HIVE_DEFAULT_PARTITION__ is a null
// (the convention of hive-style layouts, common practice).
package dataset

import (
	"errors"
	"fmt"
	"io/fs"
	"net/url"
	"os"
	"path/filepath"
	"slices"
	"strings"

	"manyfold/io/table"
)

// File is one part of a dataset: its path and the key=value pairs of the
// folders above it, outermost first.
type File struct {
	Path string
	Keys []Key
	Size int64 // bytes on disk
}

// Key is one folder's key=value pair. Null marks the hive-style null
// partition.
type Key struct {
	Name, Value string
	Null        bool
}

// nullPartition is the folder value that stands for a null key.
const nullPartition = "__HIVE_DEFAULT_PARTITION__"

// ErrNoFiles is returned by List for a directory or pattern without table
// files; it wraps table.ErrEmpty.
var ErrNoFiles error = noFiles{}

type noFiles struct{}

func (noFiles) Error() string { return "holds no table files" }
func (noFiles) Unwrap() error { return table.ErrEmpty }

// IsPattern reports whether path holds a glob metacharacter (*, ? or [),
// as filepath.Match reads them.
func IsPattern(path string) bool { return strings.ContainsAny(path, "*?[") }

// Is reports whether path names a dataset: a directory, or a pattern that
// is not itself the name of a file.
func Is(path string) bool {
	fi, err := os.Stat(path)
	if err == nil {
		return fi.IsDir()
	}
	return IsPattern(path)
}

// List returns the files of the dataset at path (a directory or a glob
// pattern; a pattern's matches that are directories are walked too), in
// the byte order of their paths. Every file must hold the same folder keys
// in the same order. A directory or pattern with no files gives ErrNoFiles.
func List(path string) ([]File, error) {
	roots, base := []string{path}, Root(path)
	if fi, err := os.Stat(path); err != nil || !fi.IsDir() {
		m, err := filepath.Glob(path)
		if err != nil {
			return nil, fmt.Errorf("%s: %w", path, err)
		}
		roots = m
	}
	var files []File
	for _, root := range roots {
		if root != path && skippedMatch(base, path, root) {
			continue
		}
		top := walkRoot(root)
		err := filepath.WalkDir(top, func(p string, d fs.DirEntry, err error) error {
			if err != nil {
				return err
			}
			if p != top && skipped(d.Name()) {
				if d.IsDir() {
					return filepath.SkipDir
				}
				return nil
			}
			if d.IsDir() {
				return nil
			}
			fi, err := os.Stat(p) // a link to a file counts as the file
			if err != nil {
				return err
			}
			if !fi.Mode().IsRegular() {
				return nil
			}
			keys, err := folderKeys(base, p)
			if err != nil {
				return err
			}
			files = append(files, File{Path: p, Keys: keys, Size: fi.Size()})
			return nil
		})
		if err != nil {
			return nil, fmt.Errorf("%s: %w", path, err)
		}
	}
	if len(files) == 0 {
		return nil, fmt.Errorf("%s: %w", path, ErrNoFiles)
	}
	slices.SortFunc(files, func(a, b File) int { return strings.Compare(a.Path, b.Path) })
	files = slices.CompactFunc(files, func(a, b File) bool { return a.Path == b.Path })
	// A file reached twice, through a link to a folder or a file (a
	// "latest" link beside the run it points to), is read once: at the
	// first of its paths.
	seen := map[string]bool{}
	files = slices.DeleteFunc(files, func(f File) bool {
		real, err := filepath.EvalSymlinks(f.Path)
		if err != nil {
			real = f.Path
		}
		if seen[real] {
			return true
		}
		seen[real] = true
		return false
	})
	for _, f := range files[1:] {
		if !sameKeys(f.Keys, files[0].Keys) {
			return nil, fmt.Errorf("%s: %w: folder keys %s, but %s has %s", f.Path, table.ErrCorrupt, keyNames(f.Keys), files[0].Path, keyNames(files[0].Keys))
		}
	}
	return files, nil
}

// Root returns the folder a dataset's files lie under: the directory path
// names (even one whose name holds a metacharacter), or the longest
// leading folder of a pattern that holds no metacharacter. Folder keys are
// read below it.
func Root(path string) string {
	if fi, err := os.Stat(path); (err == nil && fi.IsDir()) || !IsPattern(path) {
		return filepath.Clean(path)
	}
	base := filepath.Dir(path)
	for IsPattern(base) {
		base = filepath.Dir(base)
	}
	return base
}

// walkRoot returns root as filepath.WalkDir is to be given it: a link to
// a directory (a "latest" link to the last run's output) with a trailing
// separator, which makes its target the directory walked (WalkDir follows
// no link, not even its root's). The files' paths still start with root.
// Links to directories below the root are not followed.
func walkRoot(root string) string {
	if fi, err := os.Lstat(root); err != nil || fi.Mode()&fs.ModeSymlink == 0 {
		return root
	}
	if fi, err := os.Stat(root); err == nil && fi.IsDir() {
		return root + string(filepath.Separator)
	}
	return root
}

// skipped reports whether a file or folder name is an engine's own (a
// leading _ or .).
func skipped(name string) bool { return strings.HasPrefix(name, "_") || strings.HasPrefix(name, ".") }

// skippedMatch reports whether a match of pattern (whose fixed part is
// base) is an engine's entry or lies in one: whether a name that one of
// the pattern's wildcard elements matched is skipped. Names the pattern
// spells out are kept.
func skippedMatch(base, pattern, match string) bool {
	pr, err1 := filepath.Rel(base, pattern)
	mr, err2 := filepath.Rel(base, match)
	ps, ms := strings.Split(pr, string(filepath.Separator)), strings.Split(mr, string(filepath.Separator))
	if err1 != nil || err2 != nil || len(ps) != len(ms) {
		return skipped(filepath.Base(match))
	}
	for i, name := range ms {
		if IsPattern(ps[i]) && skipped(name) {
			return true
		}
	}
	return false
}

// folderKeys returns the key=value pairs of the folders between the
// dataset's root base (the directory given, or the fixed part of a
// pattern) and the file p.
func folderKeys(base, p string) ([]Key, error) {
	rel, err := filepath.Rel(base, filepath.Dir(p))
	if err != nil || rel == "." {
		return nil, nil
	}
	var keys []Key
	for _, part := range strings.Split(rel, string(filepath.Separator)) {
		name, value, ok := strings.Cut(part, "=")
		if !ok || name == "" {
			continue
		}
		k, err1 := url.PathUnescape(name)
		v, err2 := url.PathUnescape(value)
		if err := errors.Join(err1, err2); err != nil {
			return nil, fmt.Errorf("folder %q: %w", part, err)
		}
		keys = append(keys, Key{Name: k, Value: v, Null: value == nullPartition})
	}
	return keys, nil
}

// sameKeys reports whether two files have the same folder key names.
func sameKeys(a, b []Key) bool {
	return slices.EqualFunc(a, b, func(x, y Key) bool { return x.Name == y.Name })
}

// keyNames lists key names for a message.
func keyNames(keys []Key) string {
	if len(keys) == 0 {
		return "none"
	}
	names := make([]string, len(keys))
	for i, k := range keys {
		names[i] = k.Name
	}
	return strings.Join(names, ", ")
}
