package pipeline

import (
	"encoding/json"
	"os"
	"path/filepath"
	"testing"
	"time"

	"manyfold/io/tableio"
)

// fuzzDirs fits the tables directories the loader's fuzz targets damage:
// a binary target, a hierarchical prior (with parent tables), a
// regression target, a three-class target and no target. It returns them
// with their manifests and the input they were fitted on.
func fuzzDirs(f *testing.F) (dirs []string, manifests [][]byte, in string) {
	specs := []func(testing.TB) Spec{
		loadSpec,
		func(tb testing.TB) Spec { return planSpec(tb, "target:eb:prior=prefix2+freq+topk+hash") },
		func(tb testing.TB) Spec { sp := loadSpec(tb); sp.Target = "weight"; sp.Task = "regression"; return sp },
		func(tb testing.TB) Spec { sp := loadSpec(tb); sp.Target = "grade"; return sp },
		func(tb testing.TB) Spec { return planSpec(tb, "freq+topk+hash:1024:signed") },
	}
	for _, spec := range specs {
		dir := fitTablesDir(f, spec(f))
		if _, err := LoadTables(dir); err != nil {
			f.Fatalf("the tables as fitted do not load: %v", err)
		}
		b, err := os.ReadFile(filepath.Join(dir, ManifestName))
		if err != nil {
			f.Fatal(err)
		}
		dirs, manifests = append(dirs, dir), append(manifests, b)
	}
	in = filepath.Join(f.TempDir(), "new.csv")
	if err := os.WriteFile(in, []byte(loadCSV()), 0o644); err != nil {
		f.Fatal(err)
	}
	return dirs, manifests, in
}

// loadAndApply loads the tables of dir and, when they load, encodes the
// input in with them as apply does: an accepted directory must encode
// without a panic.
func loadAndApply(t *testing.T, dir, in string) {
	// The fuzzing engine has no limit on an input's time: a hang would
	// only stall it.
	wd := time.AfterFunc(time.Minute, func() { panic("loading and applying the tables of " + dir + " took over a minute") })
	defer wd.Stop()
	m, err := LoadTables(dir)
	if err != nil {
		if _, ok := err.(*ManifestError); !ok {
			t.Fatalf("%T is not a ManifestError: %v", err, err)
		}
		return
	}
	r, err := tableio.Open(in, tableio.ReadOptions{})
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	if m.CheckInput(in, r.Schema(), dir) != nil {
		return
	}
	var out collect
	if _, err := m.Encode(r, &out, EncodeOptions{File: in, Use: NewRows}); err != nil {
		return
	}
	if _, err := Merge([]*Model{m, m}, []string{dir, dir}, 0); err != nil {
		return
	}
}

// FuzzLoadManifest loads tables directories whose manifest.json holds the
// fuzzed bytes (in the directory kind%5 of fuzzDirs): LoadTables must
// return a ManifestError or a model that encodes, never panic or hang.
func FuzzLoadManifest(f *testing.F) {
	dirs, manifests, in := fuzzDirs(f)
	for i, b := range manifests {
		f.Add(b, uint8(i))
	}
	f.Fuzz(func(t *testing.T, data []byte, kind uint8) {
		dir := dirs[int(kind)%len(dirs)]
		if err := os.WriteFile(filepath.Join(dir, ManifestName), data, 0o644); err != nil {
			t.Fatal(err)
		}
		loadAndApply(t, dir, in)
	})
}

// FuzzLoadTable loads tables directories whose first table (the parent
// table for the hierarchical prior's directory) holds the fuzzed bytes,
// its checksum recorded in the manifest so that the loader reads it:
// LoadTables must return a ManifestError or a model that encodes.
func FuzzLoadTable(f *testing.F) {
	dirs, manifests, in := fuzzDirs(f)
	var mfs []Manifest
	for i, b := range manifests {
		var mf Manifest
		if err := json.Unmarshal(b, &mf); err != nil {
			f.Fatal(err)
		}
		mfs = append(mfs, mf)
		table, err := os.ReadFile(filepath.Join(dirs[i], fuzzTable(&mf)))
		if err != nil {
			f.Fatal(err)
		}
		f.Add(table, uint8(i))
	}
	f.Fuzz(func(t *testing.T, data []byte, kind uint8) {
		i := int(kind) % len(dirs)
		dir, mf := dirs[i], mfs[i]
		mf.Columns = append([]ManifestCol(nil), mf.Columns...)
		path := filepath.Join(dir, fuzzTable(&mf))
		if err := os.WriteFile(path, data, 0o644); err != nil {
			t.Fatal(err)
		}
		sum, err := fileChecksum(path)
		if err != nil {
			t.Fatal(err)
		}
		if mf.Columns[0].ParentTable != "" {
			mf.Columns[0].ParentSum = sum
		} else {
			mf.Columns[0].TableSum = sum
		}
		b, err := json.Marshal(mf)
		if err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(dir, ManifestName), b, 0o644); err != nil {
			t.Fatal(err)
		}
		loadAndApply(t, dir, in)
	})
}

// fuzzTable names the table FuzzLoadTable replaces.
func fuzzTable(mf *Manifest) string {
	if p := mf.Columns[0].ParentTable; p != "" {
		return p
	}
	return mf.Columns[0].Table
}
