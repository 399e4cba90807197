package atomicfile

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"

	"manyfold/internal/guard"
)

// exchange swaps two directories at once, or fails; a variable so that
// tests can take the way without it.
var exchange = exchangeDirs

// Dir is a directory of files in progress. Its files are written into a
// temporary directory beside the target, ".NAME.tmp-*"; Commit swaps it
// for the target whole, so the target holds the old files or the new ones,
// never a mix, and no file of the old set stays beside the new.
type Dir struct {
	path    string // the final path, as given
	target  string // the path swapped (symlinks resolved)
	tmp     string // the staging directory
	replace func(existing string) error
	ready   bool
	done    bool
}

// CreateDir makes a staging directory for the directory path, creating
// path's parent directories if needed. The staging directory gets the
// permissions of the directory it will replace, or 0777 less the umask.
// replace, when not nil, is asked at Commit whether an existing directory
// may be replaced (a directory of another kind must not be removed).
func CreateDir(path string, replace func(existing string) error) (*Dir, error) {
	target := filepath.Clean(path)
	perm := os.FileMode(0o777)
	keepPerm := false
	if fi, err := os.Stat(target); err == nil {
		if !fi.IsDir() {
			return nil, fmt.Errorf("%s exists and is not a directory", path)
		}
		if t, err := filepath.EvalSymlinks(target); err == nil {
			target = t
		}
		perm, keepPerm = fi.Mode()&keptMode, true
	}
	parent, base := filepath.Split(target)
	if parent == "" {
		parent = "."
	}
	if err := os.MkdirAll(parent, 0o777); err != nil {
		return nil, err
	}
	tmp, err := mkdirTemp(parent, "."+base+".tmp-", perm)
	if err != nil {
		return nil, err
	}
	if keepPerm {
		if err := os.Chmod(tmp, perm); err != nil {
			Remove(tmp)
			return nil, err
		}
	}
	return &Dir{path: path, target: target, tmp: tmp, replace: replace}, nil
}

// mkdirTemp makes a new directory named prefix plus a random suffix in
// parent, and tracks it. The directory is made and tracked under the
// registry's lock, as createTemp makes a file, so that a signal's Cleanup
// either finds it tracked or runs before it exists (made, then tracked,
// it could be made just before a Cleanup that the process exits after).
func mkdirTemp(parent, prefix string, perm os.FileMode) (string, error) {
	for try := 0; ; try++ {
		name := filepath.Join(parent, prefix+randomSuffix())
		err := commitLock(func() error {
			err := os.Mkdir(name, perm)
			if err == nil {
				trackLocked(name)
			}
			return err
		})
		if errors.Is(err, os.ErrExist) && try < 100 {
			continue
		}
		if err != nil {
			return "", err
		}
		return name, nil
	}
}

// Name returns the staging directory, where the files are to be written.
func (d *Dir) Name() string { return d.tmp }

// Path returns the final path of the directory.
func (d *Dir) Path() string { return d.path }

// Ready syncs every file of the staging directory and the directory
// itself, so that all that Commit has left to do is the swap.
func (d *Dir) Ready() error {
	if d.ready || d.done {
		return nil
	}
	d.ready = true
	entries, err := os.ReadDir(d.tmp)
	if err == nil {
		for _, e := range entries {
			if err = syncFile(filepath.Join(d.tmp, e.Name())); err != nil {
				break
			}
		}
	}
	if err == nil {
		err = syncDir(d.tmp)
	}
	if err != nil {
		d.Abort()
		return fmt.Errorf("write %s: %w", d.path, err)
	}
	// What Commit would refuse is refused now, before the other outputs
	// of a CommitAll are renamed into place: the target is no directory
	// (a file, a dangling link), or holds what must not be replaced.
	if err := d.replaceable(); err != nil {
		d.Abort()
		return err
	}
	return nil
}

// replaceable checks that the target is absent or a directory that
// replace accepts.
func (d *Dir) replaceable() error {
	fi, err := os.Lstat(d.target)
	switch {
	case errors.Is(err, os.ErrNotExist):
		return nil
	case err != nil:
		return err
	case !fi.IsDir():
		return fmt.Errorf("%s exists and is not a directory", d.path)
	case d.replace != nil:
		return d.replace(d.target)
	}
	return nil
}

func syncFile(path string) error {
	f, err := os.Open(path)
	if err != nil {
		return err
	}
	defer f.Close()
	return f.Sync()
}

// Commit makes the directory ready and puts it in place of the target:
// renamed to it when there is none; otherwise exchanged with it at once
// (Linux's renameat2 with RENAME_EXCHANGE) or, where that is not
// available, the old one is renamed aside (".NAME.old-*") and the new one
// in. The old directory is then removed. The parent directory is synced.
func (d *Dir) Commit() error {
	if d.done {
		return nil
	}
	if err := guard.Err(); err != nil {
		d.Abort()
		return err
	}
	if err := d.Ready(); err != nil {
		return err
	}
	d.done = true
	var old string
	err := commitLock(func() error {
		fi, err := os.Lstat(d.target)
		switch {
		case errors.Is(err, os.ErrNotExist):
			if err := os.Rename(d.tmp, d.target); err != nil {
				return err
			}
			untrackLocked(d.tmp)
			return nil
		case err != nil:
			return err
		case !fi.IsDir():
			return fmt.Errorf("%s exists and is not a directory", d.path)
		}
		if d.replace != nil {
			if err := d.replace(d.target); err != nil {
				return err
			}
		}
		if exchange(d.tmp, d.target) == nil {
			old = d.tmp // now the old directory, still tracked
			return nil
		}
		parent, base := filepath.Split(d.target)
		aside := filepath.Join(parent, "."+base+".old-"+randomSuffix())
		trackLocked(aside)
		if err := os.Rename(d.target, aside); err != nil {
			untrackLocked(aside)
			return err
		}
		if err := os.Rename(d.tmp, d.target); err != nil {
			os.Rename(aside, d.target)
			untrackLocked(aside)
			return err
		}
		untrackLocked(d.tmp)
		old = aside
		return nil
	})
	if err != nil {
		Remove(d.tmp)
		return fmt.Errorf("write %s: %w", d.path, err)
	}
	syncDir(filepath.Dir(d.target))
	if old != "" {
		Remove(old)
	}
	return nil
}

// Abort removes the staging directory, leaving the target as it was. It
// is safe to call after Commit or more than once.
func (d *Dir) Abort() {
	if d.done {
		return
	}
	d.done = true
	Remove(d.tmp)
}
