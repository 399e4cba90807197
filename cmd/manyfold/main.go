// Command manyfold turns categorical columns of large tables into compact
// numeric encodings for training tables: out-of-fold smoothed target means,
// frequency counts, top-k codes and hashed buckets, with mapping tables
// that encode new data identically later.
//
// Usage:
//
//	manyfold scan FILE [flags]      profile the categorical columns of a table
//	manyfold encode FILE [flags]    fit encodings and write the encoded table and mapping tables
//	manyfold apply FILE [flags]     encode new data with saved mapping tables
//	manyfold merge DIR DIR... [flags] merge mapping tables fitted on shards of one table
//	manyfold compare FILE [flags]   rank encodings of each column by nested cross-validation
//	manyfold demo [flags]           run the whole job on a generated parcel-network table
//
// Exit codes: 0 success; 1 unexpected failure (an internal error: a bug,
// reported in one line; MANYFOLD_DEBUG=1 adds the stack); 2 usage (bad
// flags, unknown column); 3 input cannot be read as a table (missing,
// empty, a directory, unknown format, corrupt, Parquet on standard
// input); 4 bad data in the input (ragged row, bad quote, bad target); 5
// output cannot be written; 6 mapping tables that cannot serve (wrong
// version, other columns or types); 7 drift over --fail-on (apply: the
// output and the report were written); 130 and 143 stopped by SIGINT or
// SIGTERM, with the temporary files removed.
package main

import (
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"os/signal"
	"runtime"
	"runtime/debug"
	"runtime/metrics"
	"runtime/pprof"
	"runtime/trace"
	"strings"
	"syscall"

	"github.com/spf13/pflag"

	"manyfold/encoders/pipeline"
	"manyfold/internal/evaluate/compare"
	"manyfold/internal/guard"
	"manyfold/internal/param"
	"manyfold/io/atomicfile"
	"manyfold/io/csvio"
	"manyfold/io/table"
	"manyfold/io/tableio"
)

// Exit codes, documented in the README and in the package comment.
const (
	exitOK       = 0
	exitFailure  = 1
	exitUsage    = 2
	exitInput    = 3
	exitData     = 4
	exitOutput   = 5
	exitMismatch = 6
	exitDrift    = 7 // drift over --fail-on: apply wrote its output and report
)

// exitCodes are the exit codes and what each means: the one list that
// the help of manyfold and of each command prints (exitCodesText); the
// README's "Exit codes" says the same at length (TestExitCodesInREADME).
var exitCodes = []struct {
	code    int
	meaning string
}{
	{exitOK, "success"},
	{exitFailure, "unexpected failure: an internal error (MANYFOLD_DEBUG=1 adds the stack)"},
	{exitUsage, "usage: bad flags, an unknown column, an output that is the input"},
	{exitInput, "the input cannot be read as a table (missing, empty, unknown format, corrupt)"},
	{exitData, "bad data in the input (ragged row, bad quote, bad target)"},
	{exitOutput, "an output cannot be written"},
	{exitMismatch, "mapping tables that cannot serve the input (version, columns, types)"},
	{exitDrift, "drift over --fail-on (apply: the output and the report were written)"},
	{128 + int(syscall.SIGINT), "stopped by SIGINT (temporary files removed)"},
	{128 + int(syscall.SIGTERM), "stopped by SIGTERM (temporary files removed)"},
}

var usage = `manyfold: compact numeric encodings of high-cardinality categorical columns

Usage:
  manyfold scan FILE [flags]         profile the categorical columns of a table
  manyfold encode FILE [flags]       fit encodings out of fold; write the encoded table and mapping tables
  manyfold apply FILE [flags]        encode new data with saved mapping tables
  manyfold merge DIR DIR... [flags]  merge mapping tables fitted on shards of one table
  manyfold compare FILE [flags]      rank encodings of each column by nested cross-validation
  manyfold demo [flags]              the whole job on a generated parcel-network table
  manyfold version                   the version (also --version)

FILE is CSV or newline-delimited JSON (either optionally gzip or zstd
compressed), Parquet or Arrow IPC; "-" reads standard input; a directory or
a quoted pattern ('parts/*.parquet') reads its files as one table, in path
order, key=value folders as columns.
Run "manyfold help COMMAND" (or "manyfold COMMAND --help") for a command's help and flags.

` + exitCodesText()

type command struct {
	name string
	run  func(args []string) error
}

var commands []command

func init() {
	commands = []command{
		{"scan", runScan},
		{"encode", runEncode},
		{"apply", runApply},
		{"merge", runMerge},
		{"compare", runCompare},
		{"demo", runDemo},
	}
}

func main() {
	if os.Getenv("GOGC") == "" {
		tuneGC()
	}
	stopOnSignals()
	// For contributors (see DEVELOPERS.md): an execution trace for "go
	// tool trace", or a CPU profile, of the whole run.
	recordRun("MANYFOLD_TRACE", trace.Start, trace.Stop)
	recordRun("MANYFOLD_CPUPROFILE", pprof.StartCPUProfile, pprof.StopCPUProfile)
	code := run(os.Args[1:])
	if path := os.Getenv("MANYFOLD_MEMPROFILE"); path != "" {
		// For contributors: the allocations of the whole run.
		if f, err := os.Create(path); err == nil {
			pprof.Lookup("allocs").WriteTo(f, 0)
			f.Close()
		}
	}
	os.Exit(code)
}

// recordRun runs the command line with start and stop around it, writing
// to the file the environment variable env names, and exits; it returns
// without running anything when env is unset, and says so on stderr when
// the file cannot be made or the recording cannot start.
func recordRun(env string, start func(io.Writer) error, stop func()) {
	path := os.Getenv(env)
	if path == "" {
		return
	}
	f, err := os.Create(path)
	if err != nil {
		fmt.Fprintf(os.Stderr, "manyfold: %s: %v; running without it\n", env, err)
		return
	}
	if err := start(f); err != nil {
		fmt.Fprintf(os.Stderr, "manyfold: %s: %v; running without it\n", env, err)
		f.Close()
		return
	}
	code := run(os.Args[1:])
	stop()
	f.Close()
	os.Exit(code)
}

// run executes a command line and returns the exit code.
func run(args []string) int {
	if len(args) > 1 && args[0] == "help" {
		args = []string{args[1], "--help"} // manyfold help CMD: CMD's help
	}
	if len(args) == 0 || args[0] == "-h" || args[0] == "--help" || args[0] == "help" {
		fmt.Fprint(os.Stdout, usage)
		if len(args) == 0 {
			return exitUsage
		}
		return exitOK
	}
	if args[0] == "version" || args[0] == "--version" {
		fmt.Println("manyfold", pipeline.Version)
		return exitOK
	}
	for _, c := range commands {
		if c.name == args[0] {
			err := runCommand(c, args[1:])
			if err == nil {
				return exitOK
			}
			if errors.Is(err, pflag.ErrHelp) {
				return exitOK
			}
			fmt.Fprintln(os.Stderr, "manyfold "+c.name+": "+spelled(err, flagOf))
			var p *guard.Panic
			if errors.As(err, &p) && os.Getenv("MANYFOLD_DEBUG") != "" {
				os.Stderr.Write(p.Stack)
			}
			return exitCode(err)
		}
	}
	fmt.Fprintf(os.Stderr, "manyfold: %s\n\n%s", unknownCommand(args[0]), usage)
	return exitUsage
}

// runCommand runs a command; a panic, on its goroutine or carried from a
// worker's (guard.Group), becomes a *guard.Panic error, and the temporary
// files that the command's aborts did not remove are removed. A command
// that succeeds then warns of the CSV inputs that read as one column
// holding another delimiter (oneColumn).
func runCommand(c command, args []string) (err error) {
	defer atomicfile.RemoveTracked()
	oneColumn.reset()
	defer func() {
		if err == nil {
			oneColumn.print(os.Stderr)
		}
	}()
	defer guard.Catch(&err)
	return c.run(args)
}

// stopOnSignals makes SIGINT and SIGTERM remove the run's temporary files
// (the output being written, the staged mapping tables, the spool of
// standard input: atomicfile.Cleanup) and exit 130 or 143, the codes a
// shell gives a process those signals end. A write to a closed pipe on
// standard output fails with an error (exit 5) instead of killing the
// process, so that the staged tables are removed then too.
func stopOnSignals() {
	c := make(chan os.Signal, 1)
	signal.Notify(c, os.Interrupt, syscall.SIGTERM)
	signal.Notify(make(chan os.Signal, 1), syscall.SIGPIPE)
	go func() {
		s := <-c
		atomicfile.Cleanup()
		fmt.Fprintf(os.Stderr, "manyfold: stopped by %v; temporary files removed\n", s)
		os.Exit(128 + int(s.(syscall.Signal)))
	}()
}

// flags spells the parameters that the libraries' messages name
// (param.Name) as the flags that set them, so that a message reads as the
// command line the user typed.
var flags = map[param.Name]string{
	pipeline.ParamTarget:       "--target",
	pipeline.ParamColumns:      "--columns",
	pipeline.ParamEncodings:    "--methods",
	pipeline.ParamTask:         "--task",
	pipeline.ParamFolds:        "--folds",
	pipeline.ParamGroup:        "--fold-by group",
	pipeline.ParamScheme:       "--scheme",
	pipeline.ParamMinLevelRows: "--min-level-rows",
	pipeline.ParamKeep:         "--keep",
	pipeline.ParamOrderBy:      "--order-by",
	pipeline.ParamThreads:      "--threads",
	compare.ParamInnerFolds:    "--inner-folds",
	compare.ParamLambda:        "--lambda",
	compare.ParamWith:          "--with",
	compare.ParamSample:        "--sample",
	compare.ParamCandidates:    "--candidates",
	csvio.ParamMaxFieldBytes:   "--max-field-bytes",
	csvio.ParamTypes:           "--type",
	csvio.ParamDelimiter:       "--delimiter",
	tableio.ParamFormat:        "--format",
}

// flagOf is the param.Speller of the command line: a parameter's flag.
func flagOf(n param.Name) string { return flags[n] }

// spelled returns err's message with the parameters that a library's
// message names (a param.Spellable error in its chain, whose message the
// wrappers repeat) spelled by spell.
func spelled(err error, spell param.Speller) string {
	msg := err.Error()
	var s interface {
		error
		param.Spellable
	}
	if errors.As(err, &s) {
		msg = strings.Replace(msg, s.Error(), s.Spell(spell), 1)
	}
	return msg
}

// usageError is a mistake on the command line.
type usageError struct{ msg string }

func (e *usageError) Error() string { return e.msg }

func usagef(format string, a ...any) error { return &usageError{fmt.Sprintf(format, a...)} }

// outputError is a failure to write an output.
type outputError struct{ err error }

func (e *outputError) Error() string { return e.err.Error() }
func (e *outputError) Unwrap() error { return e.err }

// exitCode maps an error to its documented exit code.
func exitCode(err error) int {
	var ue *usageError
	var pu *pipeline.UsageError
	var ce *pipeline.ColumnError
	var de *table.DataError
	var me *pipeline.ManifestError
	var oe *outputError
	var gp *guard.Panic
	var dr *driftError
	switch {
	case errors.As(err, &gp):
		return exitFailure
	case errors.As(err, &dr):
		return exitDrift
	case errors.As(err, &ue), errors.As(err, &pu), errors.As(err, &ce), errors.Is(err, csvio.ErrTypeColumn):
		return exitUsage
	case errors.As(err, &oe), isWriteError(err):
		return exitOutput
	case errors.As(err, &me):
		return exitMismatch
	case errors.Is(err, os.ErrNotExist), errors.Is(err, os.ErrPermission),
		errors.Is(err, table.ErrEmpty), errors.Is(err, table.ErrUnknownFormat), errors.Is(err, table.ErrCorrupt):
		return exitInput
	case errors.As(err, &de):
		return exitData
	}
	return exitFailure
}

// isWriteError reports whether err is a failed write to a file or a pipe
// (a full disk, a pipe whose reader went away), which a writer returns
// while the encoding runs, before the output is committed.
func isWriteError(err error) bool {
	var pe *fs.PathError
	return errors.Is(err, syscall.EPIPE) || (errors.As(err, &pe) && pe.Op == "write")
}

// commitError classes an error of committing the output: bad data that
// the writer found while converting (written behind the encoding, so it
// can surface only now) is a data error, a corrupt input page met while
// copying the input's column chunks an input error; anything else an
// output error.
func commitError(err error) error {
	var de *table.DataError
	if errors.As(err, &de) {
		return de
	}
	if errors.Is(err, table.ErrCorrupt) {
		return err
	}
	return &outputError{err}
}

// tuneGC sets the collector's target after every collection so that the
// heap may grow by gcHeadroom bytes or by 15% of the live heap, whichever
// is more, before the next (GOGC between 15 and 100). manyfold's large
// arrays (level bytes, counters) hold no pointers, so collecting often
// costs little once the heap is large and keeps the peak memory near the
// live statistics instead of twice them: at 10M levels 15% gave 0.79-0.81
// GB peak RSS against 0.90 GB with 30%, in the same time within noise.
// While the heap is small, 15% would mean a collection every few
// megabytes: on the 1M-row benchmark job, GOGC=15 took 1.13-1.17 s
// against 0.96-1.02 s with 50.
func tuneGC() {
	retuneGC()
	armGC()
}

// gcHeadroom is the heap growth between collections allowed at least.
const gcHeadroom = 64 << 20

var gcPercent = -2 // the percentage last set

// armGC leaves garbage whose finalizer, run after the next collection,
// retunes the collector and arms it again.
func armGC() {
	s := new([32]byte)
	runtime.SetFinalizer(s, func(*[32]byte) {
		retuneGC()
		armGC()
	})
}

// retuneGC sets GOGC from the live heap.
func retuneGC() {
	sample := []metrics.Sample{{Name: "/gc/heap/live:bytes"}}
	metrics.Read(sample)
	pct := 100
	if sample[0].Value.Kind() == metrics.KindUint64 {
		pct = gcPercentFor(sample[0].Value.Uint64())
	}
	if pct != gcPercent {
		gcPercent = pct
		debug.SetGCPercent(pct)
	}
}

// gcPercentFor returns the GOGC that lets a live heap of live bytes grow
// by gcHeadroom, between 15 and 100.
func gcPercentFor(live uint64) int {
	if live == 0 {
		return 100
	}
	return int(max(15, min(100, 100*gcHeadroom/live)))
}
