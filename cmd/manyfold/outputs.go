package main

import (
	"fmt"
	"os"
	"path/filepath"
	"strings"

	"manyfold/encoders/pipeline"
	"manyfold/io/dataset"
	"manyfold/io/tableio"
)

// checkTablesFlag vets a --tables directory that a command will write,
// before any input is read: the tables replace the whole directory, so it
// must not hold the output, the input or anything but mapping tables.
// Paths are compared after resolving symbolic links; "-" (standard input
// or output) is never inside.
func checkTablesFlag(tables, input, out string) error {
	if fi, err := os.Stat(tables); err == nil && !fi.IsDir() {
		return &outputError{fmt.Errorf("tables: %s exists and is not a directory", tables)}
	}
	if out != "" && out != tableio.Stdout && within(out, tables) {
		return usagef("--out %s is inside --tables %s, which the mapping tables replace whole; write the output elsewhere", out, tables)
	}
	if input != "" && input != "-" && within(input, tables) {
		return usagef("the input %s is inside --tables %s, which the mapping tables replace whole; give another --tables", input, tables)
	}
	if input != "" && input != "-" && reads(input, tables) {
		return usagef("--tables %s is inside the input %s, whose files are all read; give another --tables", tables, input)
	}
	if err := pipeline.CheckTablesDir(tables); err != nil {
		return usagef("--tables %v", err)
	}
	return nil
}

// reads reports whether the input (a file, or a dataset: a directory or a
// glob pattern, see package dataset) reads path or would read it once it
// is written: path is the input file, lies in the input directory, or
// matches the pattern or lies in a folder that matches it.
func reads(input, path string) bool {
	if input == "-" || path == "" || path == tableio.Stdout {
		return false
	}
	if !dataset.Is(input) {
		return sameFile(input, path)
	}
	if !dataset.IsPattern(input) || isDir(input) {
		return within(path, input)
	}
	abs, err1 := filepath.Abs(input)
	p, err2 := filepath.Abs(path)
	if err1 != nil || err2 != nil {
		return false
	}
	for q := p; ; q = filepath.Dir(q) {
		if ok, _ := filepath.Match(abs, q); ok {
			return true
		}
		if q == filepath.Dir(q) {
			return false
		}
	}
}

// isDir reports whether path is a directory.
func isDir(path string) bool {
	fi, err := os.Stat(path)
	return err == nil && fi.IsDir()
}

// within reports whether path is dir or lies under it.
func within(path, dir string) bool {
	p, d := resolved(path), resolved(dir)
	return p == d || strings.HasPrefix(p, d+string(filepath.Separator))
}

// resolved returns path made absolute, with the symbolic links of its
// longest existing prefix resolved.
func resolved(path string) string {
	abs, err := filepath.Abs(path)
	if err != nil {
		return filepath.Clean(path)
	}
	var rest []string
	for p := abs; ; p = filepath.Dir(p) {
		if r, err := filepath.EvalSymlinks(p); err == nil {
			return filepath.Join(append([]string{r}, rest...)...)
		}
		if p == filepath.Dir(p) {
			return abs
		}
		rest = append([]string{filepath.Base(p)}, rest...)
	}
}

// sameOutput reports whether two output paths name the same file, existing
// or not.
func sameOutput(a, b string) bool {
	if a == "" || b == "" {
		return false
	}
	if resolved(a) == resolved(b) {
		return true
	}
	return sameFile(a, b)
}

// outName names an output path in messages: "standard output" for "-".
func outName(out string) string {
	if out == tableio.Stdout {
		return "standard output"
	}
	return out
}
