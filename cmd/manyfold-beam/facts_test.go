package main

import (
	"context"
	"os"
	"path/filepath"
	"slices"
	"testing"
)

// TestFactsKeepLabelBytes: a shard's facts reach the other stages with
// their class labels byte for byte, Latin-1 ones too (JSON would turn
// "caf\xe9" and "caf\xe8" into one UTF-8 label).
func TestFactsKeepLabelBytes(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "part-0.csv")
	if err := os.WriteFile(path, []byte("sender,grade\nS1,caf\xe9\nS2,caf\xe8\nS1,caf\xe9\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	job := Job{Target: "grade", Columns: "sender", Methods: "target:eb", FoldBy: "rows", Scheme: "kfold", Folds: 2}
	var out [][]byte
	fn := &surveyFn{Job: job}
	if err := fn.ProcessElement(context.Background(), Shard{Index: 0, Path: path}, func(b []byte) { out = append(out, b) }); err != nil {
		t.Fatal(err)
	}
	// Through the facts file the join writes and the workers read.
	job.Stats = filepath.Join(dir, "_stats")
	i := 0
	var works []Work
	err := (&joinFn{Job: job}).ProcessElement(context.Background(), 0, func(b *[]byte) bool {
		if i == len(out) {
			return false
		}
		*b = out[i]
		i++
		return true
	}, func(sh *Shard) bool {
		if len(works) > 0 {
			return false
		}
		*sh = Shard{Index: 0, Path: path}
		return true
	}, func(w Work) { works = append(works, w) })
	if err != nil || len(works) != 1 {
		t.Fatalf("join: %d works, error %v", len(works), err)
	}
	facts, err := loadFacts(context.Background(), works[0].Facts)
	if err != nil || len(facts) != 1 {
		t.Fatalf("facts %v, error %v", facts, err)
	}
	if got := facts[0].Facts.Labels; !slices.Equal(got, []string{"caf\xe9", "caf\xe8"}) {
		t.Errorf("labels %q, want the shard's bytes", got)
	}
}
