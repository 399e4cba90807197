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
	i := 0
	facts, err := readFacts(func(b *[]byte) bool {
		if i == len(out) {
			return false
		}
		*b = out[i]
		i++
		return true
	})
	if err != nil || len(facts) != 1 {
		t.Fatalf("facts %v, error %v", facts, err)
	}
	if got := facts[0].Facts.Labels; !slices.Equal(got, []string{"caf\xe9", "caf\xe8"}) {
		t.Errorf("labels %q, want the shard's bytes", got)
	}
}
