package main

import (
	"crypto/sha256"
	"encoding/hex"
	"flag"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"manyfold/internal/parcels"
	"manyfold/io/tableio"
)

// updateGolden rewrites testdata/golden.txt from the current outputs:
// go test ./cmd/manyfold -run TestGoldenOutputs -update-golden
var updateGolden = flag.Bool("update-golden", false, "rewrite testdata/golden.txt from the current outputs")

// goldenRuns are the command lines whose outputs must not change when the
// code is reorganised: every method, scheme, smoothing, hierarchy, task,
// output and fold rule, and apply on new shipments. IN, NEW and OUT stand
// for the training table, the new shipments and the run's directory.
var goldenRuns = []struct {
	name string
	args string
}{
	{"binary-all-methods", "encode IN --target late --columns dest_postcode,sender_account,route --methods target:eb+freq+topk:20+hash:1024:signed --fold-column fold --out OUT/o.parquet --tables OUT/t"},
	{"binary-apply", "apply NEW --tables OUT/../binary-all-methods/t --out OUT/o.csv"},
	{"regression-auto", "encode IN --target cost --columns dest_postcode,route --out OUT/o.csv --tables OUT/t"},
	{"regression-blend-loo", "encode IN --target cost --columns dest_postcode --scheme loo --methods target:blend=5,2 --out OUT/o.csv --tables OUT/t"},
	{"binary-m-logodds", "encode IN --target late --columns dest_postcode,sender_account --methods target:m=20:logodds --out OUT/o.arrow --tables OUT/t"},
	{"binary-prefix-prior", "encode IN --target late --columns dest_postcode --methods target:eb:prior=prefix3 --out OUT/o.csv --tables OUT/t"},
	{"binary-column-prior", "encode IN --target late --columns dest_postcode,sender_account --methods target:eb:prior=column:route --out OUT/o.csv --tables OUT/t"},
	{"multiclass", "encode IN --target parcel_type --columns dest_postcode,route --methods target:eb+freq --out OUT/o.csv --tables OUT/t"},
	{"stratified", "encode IN --target late --columns sender_account --fold-by stratified --fold-column fold --out OUT/o.csv --tables OUT/t"},
	{"group-folds", "encode IN --target late --columns dest_postcode --fold-by group=sender_account --fold-column fold --out OUT/o.csv --tables OUT/t"},
	{"ordered-scheme", "encode IN --target late --columns route --scheme ordered --out OUT/o.csv --tables OUT/t"},
	{"unsupervised-min-rows", "encode IN --columns dest_postcode,sender_account --methods freq:share+topk+hash --min-level-rows 3 --nulls unseen --out OUT/o.parquet --tables OUT/t"},
}

// TestGoldenOutputs runs goldenRuns on a generated table and compares the
// SHA-256 of every file they write with testdata/golden.txt: a change that
// moves a byte of an output or a mapping table fails here, and a change
// meant to do so rewrites the file (-update-golden) in its own commit,
// saying why.
func TestGoldenOutputs(t *testing.T) {
	dir := t.TempDir()
	in, fresh := filepath.Join(dir, "shipments.csv"), filepath.Join(dir, "new.csv")
	for _, g := range []struct {
		path string
		cfg  parcels.Config
	}{
		{in, parcels.Config{Rows: 20000, Seed: 7, Postcodes: 3000, Accounts: 5000}},
		{fresh, parcels.Config{Rows: 5000, Seed: 7, Stream: 1, Postcodes: 3000, Accounts: 5000, UnseenShare: 0.2}},
	} {
		w, err := tableio.Create(g.path, parcels.Schema(), tableio.WriteOptions{})
		if err != nil {
			t.Fatal(err)
		}
		if err := parcels.Generate(g.cfg, w); err != nil {
			t.Fatal(err)
		}
		if err := w.Commit(); err != nil {
			t.Fatal(err)
		}
	}
	var lines []string
	for _, run := range goldenRuns {
		out := filepath.Join(dir, run.name)
		if err := os.MkdirAll(out, 0o755); err != nil {
			t.Fatal(err)
		}
		r := strings.NewReplacer("IN", in, "NEW", fresh, "OUT", out)
		mustRun(t, strings.Fields(r.Replace(run.args))...)
		err := filepath.WalkDir(out, func(p string, d os.DirEntry, err error) error {
			if err != nil || d.IsDir() {
				return err
			}
			b, err := os.ReadFile(p)
			if err != nil {
				return err
			}
			sum := sha256.Sum256(b)
			rel, _ := filepath.Rel(dir, p)
			lines = append(lines, fmt.Sprintf("%s %s", filepath.ToSlash(rel), hex.EncodeToString(sum[:])))
			return nil
		})
		if err != nil {
			t.Fatal(err)
		}
	}
	slices.Sort(lines)
	golden := filepath.Join("testdata", "golden.txt")
	got := strings.Join(lines, "\n") + "\n"
	if *updateGolden {
		if err := os.WriteFile(golden, []byte(got), 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	b, err := os.ReadFile(golden)
	if err != nil {
		t.Fatalf("%v (make it with -update-golden)", err)
	}
	want := strings.Split(strings.TrimSuffix(string(b), "\n"), "\n")
	if !slices.Equal(lines, want) {
		for _, l := range lines {
			if !slices.Contains(want, l) {
				t.Errorf("changed or new: %s", l)
			}
		}
		for _, l := range want {
			if !slices.Contains(lines, l) {
				t.Errorf("expected:       %s", l)
			}
		}
	}
}
