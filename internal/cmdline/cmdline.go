// Package cmdline writes manyfold command lines: the encode command that
// carries out what scan suggests or compare finds, quoted for a POSIX
// shell, so that a user can paste it as it is.
package cmdline

import (
	"path/filepath"
	"strings"

	"manyfold/encoders/method"
	"manyfold/io/dataset"
)

// Encode returns the manyfold encode command that encodes the columns of
// file with plan (its per-column form when the columns differ), target
// the target column ("" for none), then flags as given, writing
// STEM_encoded.EXT and the mapping tables STEM_tables beside file (for a
// dataset, a directory or a pattern: DIR_encoded.parquet and DIR_tables
// beside the folder that holds its files).
func Encode(file, target string, plan method.Plan, flags ...string) string {
	ext := filepath.Ext(file)
	stem := strings.TrimSuffix(file, ext)
	switch {
	case file == "-":
		stem, ext = "encoded", ".parquet"
	case dataset.Is(file):
		stem, ext = dataset.Root(file), ".parquet"
	case ext == "":
		stem, ext = "encoded", ".parquet"
	}
	args := []string{"manyfold", "encode", file}
	if target != "" {
		args = append(args, "--target", target)
	}
	args = append(args, "--methods", plan.String())
	args = append(args, flags...)
	args = append(args, "--out", stem+"_encoded"+ext, "--tables", stem+"_tables")
	return Join(args)
}

// Join quotes each argument for a POSIX shell when it needs it and joins
// them with spaces.
func Join(args []string) string {
	out := make([]string, len(args))
	for i, a := range args {
		out[i] = Quote(a)
	}
	return strings.Join(out, " ")
}

// Quote returns a as one shell word: as it is when it holds only letters,
// digits and -_./=:,+@%, otherwise in single quotes (a quote inside
// written '\”).
func Quote(a string) string {
	if a != "" && strings.Trim(a, "abcdefghijklmnopqrstuvwxyzABCDEFGHIJKLMNOPQRSTUVWXYZ0123456789-_./=:,+@%") == "" {
		return a
	}
	return "'" + strings.ReplaceAll(a, "'", `'\''`) + "'"
}
