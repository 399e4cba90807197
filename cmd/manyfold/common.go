package main

import (
	"errors"
	"fmt"
	"io"
	"os"
	"runtime"
	"strings"

	"github.com/spf13/pflag"

	"manyfold/encoders/pipeline"
	"manyfold/internal/hugemem"
	"manyfold/internal/param"
	"manyfold/io/atomicfile"
	"manyfold/io/csvio"
	"manyfold/io/dataset"
	"manyfold/io/derive"
	"manyfold/io/pqio"
	"manyfold/io/table"
	"manyfold/io/tableio"
)

// newFlags returns a flag set that reports errors instead of exiting and
// prints the command's help for --help (commandUsage: text, the flags with
// their defaults, the exit codes).
func newFlags(name, text string) *pflag.FlagSet {
	fs := pflag.NewFlagSet(name, pflag.ContinueOnError)
	fs.SortFlags = false
	fs.Usage = func() { fmt.Fprint(os.Stdout, commandUsage(fs, text)) }
	fs.SetOutput(io.Discard)
	return fs
}

// parseFlags parses args, printing the usage on --help and turning other
// flag errors into usage errors.
func parseFlags(fs *pflag.FlagSet, args []string) error {
	if err := fs.Parse(args); err != nil {
		if err == pflag.ErrHelp {
			return err // pflag has printed the usage
		}
		return usagef("%s (see manyfold %s --help)", unknownFlag(fs, err), fs.Name())
	}
	return nil
}

// inputFlags are the flags that say how to read CSV input.
type inputFlags struct {
	delim    string
	noHeader bool
	types    []string
	maxField int
}

// maxFieldLimit is the largest --max-field-bytes: 1 GiB, as a batch of the
// CSV reader holds at most 2 GiB.
const maxFieldLimit = 1 << 30

func (f *inputFlags) add(fs *pflag.FlagSet) {
	fs.StringVar(&f.delim, "delimiter", "", "CSV field delimiter: , ; tab or | (default: tab for a .tsv file, , otherwise)")
	fs.BoolVar(&f.noHeader, "no-header", false, "CSV input has no header row; columns are named col1, col2, ...")
	fs.StringSliceVar(&f.types, "type", nil, "override an inferred CSV column type, COL=text|int|float|bool (repeatable)")
	fs.IntVar(&f.maxField, "max-field-bytes", csvio.DefaultMaxFieldBytes, "longest CSV field accepted, in bytes as written (1 to 1073741824); a longer one is an error")
}

func (f *inputFlags) options() (tableio.ReadOptions, error) {
	var o csvio.Options
	switch f.delim {
	case "":
		// 0: the input's extension decides (tableio.DelimiterOf).
	case ",", "comma":
		o.Delimiter = ','
	case ";", "semicolon":
		o.Delimiter = ';'
	case "tab", "\\t", "\t":
		o.Delimiter = '\t'
	case "|", "pipe":
		o.Delimiter = '|'
	default:
		return tableio.ReadOptions{}, usagef("--delimiter %q: want , ; tab or |", f.delim)
	}
	o.NoHeader = f.noHeader
	o.OneColumn = oneColumn.note
	if f.maxField < 1 || f.maxField > maxFieldLimit {
		return tableio.ReadOptions{}, usagef("--max-field-bytes %d: want 1 to %d", f.maxField, maxFieldLimit)
	}
	o.MaxFieldBytes = f.maxField
	for _, t := range f.types {
		name, kind, ok := strings.Cut(t, "=")
		if !ok {
			return tableio.ReadOptions{}, usagef("--type %q: want COL=text|int|float|bool", t)
		}
		k, err := table.ParseKind(kind)
		if err != nil {
			return tableio.ReadOptions{}, usagef("--type %s: %v", t, err)
		}
		if o.Types == nil {
			o.Types = map[string]table.Kind{}
		}
		o.Types[name] = k
	}
	return tableio.ReadOptions{CSV: o}, nil
}

// outputFlags are the flags of the encoded table that encode and apply
// write.
type outputFlags struct {
	out, format, compression string
	threads                  int
}

func (f *outputFlags) add(fs *pflag.FlagSet) {
	fs.StringVar(&f.out, "out", "", "encoded table: .parquet, .csv or .arrow; - for standard output (with --format)")
	fs.StringVar(&f.format, "format", "", "output format, overriding the extension: parquet, csv, arrow (default: from --out's extension)")
	fs.StringVar(&f.compression, "compression", "snappy", "Parquet output compression: snappy, zstd, none")
	fs.IntVar(&f.threads, "threads", runtime.NumCPU(), "cores to use: columns encoded at once, and reading, encoding and writing side by side (the output is the same for any number)")
}

// options checks the output's path, format (from --format or the
// extension) and compression before any input is read, so that a mistake
// in them is a usage error reported at once rather than after a pass over a
// large input.
func (f *outputFlags) options(input string) (tableio.WriteOptions, error) {
	if reads(input, f.out) {
		return tableio.WriteOptions{}, usagef("--out %s is the input file or among its files; choose another path", f.out)
	}
	format := tableio.Format(f.format)
	switch format {
	case "":
		if f.out == tableio.Stdout {
			return tableio.WriteOptions{}, usagef("--out - writes to standard output: give its format with --format csv, parquet or arrow")
		}
		if tableio.FormatOf(f.out) == "" {
			return tableio.WriteOptions{}, usagef("--out %s: cannot tell the output format from the extension (use .csv, .parquet or .arrow, or give --format)", f.out)
		}
	case tableio.CSV, tableio.Parquet, tableio.Arrow:
	default:
		return tableio.WriteOptions{}, usagef("--format %q: want parquet, csv or arrow", f.format)
	}
	switch f.compression {
	case "snappy", "zstd", "none":
	default:
		return tableio.WriteOptions{}, usagef("--compression %q: want snappy, zstd or none", f.compression)
	}
	if err := pipeline.CheckThreads(f.threads); err != nil {
		return tableio.WriteOptions{}, err
	}
	// The reader ahead, the writer behind and the column encoders all run
	// on goroutines: --threads bounds the cores they share.
	runtime.GOMAXPROCS(f.threads)
	return tableio.WriteOptions{Format: format, Parquet: pqio.WriterOptions{Compression: f.compression}}, nil
}

// renamed is an error whose message names an input by the name the user
// gave (stdin) instead of the temporary file it was read from; it unwraps
// to the original error, so its exit code is unchanged.
type renamed struct {
	err      error
	from, to string
}

func (e *renamed) Error() string { return strings.ReplaceAll(e.err.Error(), e.from, e.to) }
func (e *renamed) Unwrap() error { return e.err }

// Spell returns the message with the parameters spelled by spell, the
// input renamed.
func (e *renamed) Spell(spell param.Speller) string {
	return strings.ReplaceAll(spelled(e.err, spell), e.from, e.to)
}

// spoolInput prepares an input that is read more than once: standard input
// ("-") is spooled to a temporary file. It returns the path to read, the
// name to use in messages, and done, which the command calls with its error
// on return: done removes the spool file and makes the error name stdin
// instead of it.
func spoolInput(file string) (path, name string, done func(error) error, err error) {
	path, cleanup, err := spool(file)
	if err != nil {
		return "", "", nil, err
	}
	name = file
	if file == "-" {
		name = "stdin"
	}
	done = func(err error) error {
		cleanup()
		if path != file {
			oneColumn.rename(path, "stdin")
		}
		if err != nil && path != file {
			return &renamed{err: err, from: path, to: "stdin"}
		}
		return err
	}
	return path, name, done, nil
}

// selectColumns checks that every name exists in the schema and returns
// their positions; a missing name is a ColumnError listing close names.
func selectColumns(file, flag string, s *table.Schema, names []string) ([]int, error) {
	var idx []int
	for _, n := range names {
		i := s.Index(n)
		if i < 0 {
			return nil, &pipeline.ColumnError{File: file, By: flag, Name: n, Have: s.Names()}
		}
		idx = append(idx, i)
	}
	return idx, nil
}

// spool copies standard input to a temporary file so that it can be read
// twice, and returns its path and a function that removes it.
func spool(path string) (string, func(), error) {
	if path != "-" {
		return path, func() {}, nil
	}
	// Tracked from its creation, so that a run stopped by a signal
	// removes it.
	f, err := atomicfile.CreateTemp("", "manyfold-stdin-")
	if err != nil {
		return "", nil, err
	}
	if _, err := io.Copy(f, os.Stdin); err != nil {
		f.Close()
		atomicfile.Remove(f.Name())
		return "", nil, fmt.Errorf("stdin: %w", err)
	}
	if err := f.Close(); err != nil {
		atomicfile.Remove(f.Name())
		return "", nil, err
	}
	return f.Name(), func() { atomicfile.Remove(f.Name()) }, nil
}

// sameFile reports whether two paths name the same existing file.
func sameFile(a, b string) bool {
	fa, err := os.Stat(a)
	if err != nil {
		return false
	}
	fb, err := os.Stat(b)
	if err != nil {
		return false
	}
	return os.SameFile(fa, fb)
}

// reserveHeap readies the heap for a job on the files or directories of
// files at paths (see hugemem.ReserveHeap): 256 MiB plus four times their
// size, about what the heap reaches on the benchmark job (its 27 MB
// Parquet file of 1M rows ran in a heap of about 230 MB, its 812 MB file
// of 30M rows in about 2.1 GB). Inputs under 256 KiB in all get nothing:
// their job touches too little memory for the reservation to pay (1,000
// rows of the benchmark table, 30 KB: 0.04 s either way, 20-25 MB peak RSS
// without, 44-51 MB with), while from some ten thousand rows it does
// (30,000 rows, 0.86 MB: 0.12 -> 0.08 s; 100,000 rows, 2.7 MB: 0.28 ->
// 0.14-0.22 s, 10-20 MB more peak RSS). Standard input counts once it is
// spooled.
func reserveHeap(paths ...string) {
	var size int64
	for _, p := range paths {
		size += diskSize(p)
	}
	if size < 256<<10 {
		return
	}
	hugemem.ReserveHeap(int(min(256<<20+4*size, 1<<40)))
}

// diskSize returns the size of a regular file, or the total size of the
// regular files in a directory, and 0 for anything else.
func diskSize(path string) int64 {
	fi, err := os.Stat(path)
	if err != nil {
		return 0
	}
	if fi.Mode().IsRegular() {
		return fi.Size()
	}
	if !fi.IsDir() {
		return 0
	}
	entries, err := os.ReadDir(path)
	if err != nil {
		return 0
	}
	var size int64
	for _, e := range entries {
		if info, err := e.Info(); err == nil && info.Mode().IsRegular() {
			size += info.Size()
		}
	}
	return size
}

// openTable opens the table at path and adds the derived columns that
// names ask for: crosses (origin*destination) and conditions (delay>15),
// see io/derive. A name that is neither a column nor a derived one is left
// for the caller to report.
func openTable(path string, ropts tableio.ReadOptions, names []string) (table.Reader, error) {
	r, err := tableio.Open(path, ropts)
	if err != nil {
		return nil, err
	}
	w, err := derive.Wrap(r, names)
	if err != nil {
		r.Close()
		return nil, usagef("%s: %v", path, err)
	}
	return w, nil
}

// locate gives an error found in a dataset's rows past its readers (it
// names the dataset and a row counted across the files) the file that
// holds the row and the row's number there, as a file's own reader names
// them. Other errors are returned as they are.
func locate(err error, r table.Reader) error {
	var de *table.DataError
	if err == nil || !errors.As(err, &de) || de.Row <= 0 {
		return err
	}
	ds, ok := table.Find[*dataset.Reader](r)
	if !ok || ds.IsFile(de.File) {
		return err
	}
	if file, row, ok := ds.Locate(de.Row); ok {
		de.File, de.Row, de.Line = file, row, 0
	}
	return err
}

// specNames lists every column an encoding job names: the encoded
// columns, the target, the prior and group columns and --order-by.
func specNames(sp *pipeline.Spec) []string {
	names := append([]string{}, sp.Columns...)
	names = append(names, sp.Target, sp.GroupColumn(), sp.OrderBy)
	return append(names, sp.PriorColumns()...)
}
