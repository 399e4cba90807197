// Package pipeline runs manyfold's main job: one pass over a table gathers
// per-level statistics of the categorical columns (the fit), a second pass
// writes the table back with the encoded columns appended, and the fitted
// statistics are saved as mapping tables that encode new data identically.
package pipeline

import (
	"fmt"
	"math"
	"slices"
	"strings"

	"manyfold/encoders/colstats"
	"manyfold/io/table"
)

// The encoding methods.
const (
	MethodTarget = "target"
	MethodFreq   = "freq"
	MethodTopK   = "topk"
	MethodHash   = "hash"
)

// MaxClasses is the largest number of target classes a classification
// target may have.
const MaxClasses = 64

// Spec holds every parameter of an encoding job. Its zero value is not
// valid; start from DefaultSpec.
type Spec struct {
	Target  string   // target column
	Columns []string // categorical columns to encode
	Methods []string // of target, freq, topk, hash, in output order
	Task    string   // "" detects; binary, multiclass, regression

	Folds  int    // K for kfold
	FoldBy string // rows, stratified, group=COL, ordered
	Seed   uint64
	Scheme string // kfold, loo, ordered, none

	Smoothing   colstats.Smoothing
	PriorPrefix int    // >0: prior of a level is the smoothed mean of its first PriorPrefix bytes
	PriorColumn string // prior of a row's level is the smoothed mean of the row's value of this column
	Output      string // rate or logodds

	FreqShare bool   // frequency as a share of the fitting rows instead of a count
	TopK      int    // codes 1..TopK
	MinCount  uint64 // top-k: only levels with at least MinCount rows get a code

	Buckets  uint64
	HashSeed uint64
	Signed   bool

	MinLevelRows uint64 // levels with fewer rows are left out of the tables and treated as unseen
	NullsUnseen  bool   // nulls are treated as unseen instead of as a level of their own
	Keep         []string
	KeepAll      bool
	FoldColumn   string // "" for none
	OrderBy      string // a column the input must be sorted by (ascending), checked during the fit
}

// DefaultSpec returns the defaults documented in the command's help.
func DefaultSpec() Spec {
	return Spec{
		Methods:   []string{MethodTarget},
		Folds:     5,
		FoldBy:    "rows",
		Scheme:    "kfold",
		Smoothing: colstats.Smoothing{Kind: "auto"},
		Output:    "rate",
		TopK:      100,
		MinCount:  1,
		Buckets:   1024,
		KeepAll:   true,
	}
}

// ParseSmoothing parses auto, m=NUM or blend=K,F.
func ParseSmoothing(s string) (colstats.Smoothing, error) {
	switch {
	case s == "auto":
		return colstats.Smoothing{Kind: "auto"}, nil
	case strings.HasPrefix(s, "m="):
		var m float64
		if _, err := fmt.Sscanf(s[2:], "%g", &m); err != nil || !(m >= 0) || math.IsInf(m, 1) {
			return colstats.Smoothing{}, fmt.Errorf("--smoothing %s: m must be a finite number >= 0", s)
		}
		return colstats.Smoothing{Kind: "m", M: m}, nil
	case strings.HasPrefix(s, "blend="):
		var k, f float64
		if _, err := fmt.Sscanf(s[6:], "%g,%g", &k, &f); err != nil || math.IsNaN(k) || math.IsInf(k, 0) || !(f >= 0) || math.IsInf(f, 1) {
			return colstats.Smoothing{}, fmt.Errorf("--smoothing %s: want blend=K,F with finite K and F >= 0", s)
		}
		return colstats.Smoothing{Kind: "blend", K: k, F: f}, nil
	}
	return colstats.Smoothing{}, fmt.Errorf("--smoothing %q: want auto, m=NUM or blend=K,F", s)
}

// has reports whether the spec asks for method m.
func (sp *Spec) has(m string) bool {
	for _, x := range sp.Methods {
		if x == m {
			return true
		}
	}
	return false
}

// Validate checks the parameters that do not depend on the data.
func (sp *Spec) Validate() error {
	if len(sp.Columns) == 0 {
		return usageErr("no columns to encode: give --columns")
	}
	seen := map[string]bool{}
	for _, c := range sp.Columns {
		if seen[c] {
			return usageErr("column %q is named twice in --columns", c)
		}
		seen[c] = true
	}
	if len(sp.Methods) == 0 {
		return usageErr("no methods: give --methods")
	}
	for _, m := range sp.Methods {
		switch m {
		case MethodTarget, MethodFreq, MethodTopK, MethodHash:
		default:
			return usageErr("unknown method %q (want target, freq, topk, hash)", m)
		}
	}
	if sp.has(MethodTarget) && sp.Target == "" {
		return usageErr("the target method needs --target")
	}
	switch sp.Scheme {
	case "kfold", "loo", "ordered", "none":
	default:
		return usageErr("unknown --scheme %q (want kfold, loo, ordered, none)", sp.Scheme)
	}
	if sp.Scheme == "kfold" && (sp.Folds < 2 || sp.Folds > MaxFolds) {
		return usageErr("--folds %d: want 2 to %d (for leave-one-out give --scheme loo)", sp.Folds, MaxFolds)
	}
	switch {
	case sp.FoldBy == "rows", sp.FoldBy == "stratified", sp.FoldBy == "ordered":
	case strings.HasPrefix(sp.FoldBy, "group=") && len(sp.FoldBy) > 6:
	default:
		return usageErr("unknown --fold-by %q (want rows, stratified, group=COL, ordered)", sp.FoldBy)
	}
	if sp.FoldBy == "stratified" && sp.Target == "" {
		return usageErr("--fold-by stratified needs --target")
	}
	if sp.Output != "rate" && sp.Output != "logodds" {
		return usageErr("unknown --output %q (want rate or logodds)", sp.Output)
	}
	// A log-odds output needs rates strictly inside (0, 1).
	sp.Smoothing.Interior = sp.Output == "logodds"
	if sp.TopK < 1 {
		return usageErr("--top-k %d: need at least 1", sp.TopK)
	}
	if sp.Buckets < 1 || sp.Buckets > MaxBuckets {
		return usageErr("--buckets %d: want 1 to %d", sp.Buckets, uint64(MaxBuckets))
	}
	if sp.PriorPrefix < 0 {
		return usageErr("--prior-by prefix=%d: want a length of at least 1", sp.PriorPrefix)
	}
	if sp.PriorPrefix > 0 && sp.PriorColumn != "" {
		return usageErr("--prior-by takes a prefix or a column, not both")
	}
	if sp.Task != "" {
		if _, err := colstats.ParseTask(sp.Task); err != nil {
			return usageErr("--task: %v", err)
		}
	}
	return nil
}

// Limits of the numeric parameters, checked by Validate before any data is
// read. A level keeps a counter per fold and class, so memory grows with
// --folds; bucket numbers are written as 64-bit signed integers.
const (
	MaxFolds   = 100
	MaxBuckets = 1<<63 - 1
)

// CheckThreads checks a --threads value, the same for every command.
func CheckThreads(n int) error {
	if n < 1 {
		return usageErr("--threads %d: want at least 1", n)
	}
	return nil
}

// groupColumn returns the column named by --fold-by group=COL, or "".
func (sp *Spec) groupColumn() string {
	if strings.HasPrefix(sp.FoldBy, "group=") {
		return sp.FoldBy[6:]
	}
	return ""
}

// folds returns the number of folds statistics are split into: K for
// kfold, 1 otherwise.
func (sp *Spec) folds() int {
	if sp.Scheme == "kfold" {
		return sp.Folds
	}
	return 1
}

// UsageError is a mistake in the job's parameters or column names.
type UsageError struct{ Msg string }

func (e *UsageError) Error() string { return e.Msg }

func usageErr(format string, a ...any) error {
	return &UsageError{Msg: fmt.Sprintf(format, a...)}
}

// FitColumns returns the positions in s of the columns the fit reads: the
// encoded columns, the target and the group column, in schema order. ok is
// false when one of them is missing (Fit then reports it by name).
func (sp *Spec) FitColumns(s *table.Schema) (cols []int, ok bool) {
	need := map[string]bool{sp.Target: sp.Target != "", sp.groupColumn(): sp.groupColumn() != "", sp.OrderBy: sp.OrderBy != "", sp.PriorColumn: sp.PriorColumn != ""}
	for _, c := range sp.Columns {
		need[c] = true
	}
	for i, f := range s.Fields {
		if need[f.Name] {
			cols = append(cols, i)
			delete(need, f.Name)
		}
	}
	for _, v := range need {
		if v {
			return nil, false
		}
	}
	return cols, true
}

// CheckOutputNames reports, before any row is read, an encoded column
// whose name a kept input column already has (multi-class names, which
// depend on the classes found, are checked after the fit).
func (sp *Spec) CheckOutputNames(file string, s *table.Schema) error {
	kept := map[string]bool{}
	for _, f := range s.Fields {
		if sp.KeepAll || slices.Contains(sp.Keep, f.Name) {
			kept[f.Name] = true
		}
	}
	names := []string{}
	if sp.FoldColumn != "" {
		names = append(names, sp.FoldColumn)
	}
	for _, c := range sp.Columns {
		for _, m := range sp.Methods {
			switch m {
			case MethodTarget:
				names = append(names, c+"_tmean")
			case MethodHash:
				names = append(names, c+"_hash")
				if sp.Signed {
					names = append(names, c+"_hash_sign")
				}
			default:
				names = append(names, c+"_"+m)
			}
		}
	}
	for _, n := range names {
		if kept[n] {
			return usageErr("%s: output column %q would appear twice: the input has it; drop it with --keep or rename it", file, n)
		}
	}
	return nil
}
