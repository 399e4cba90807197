package main

import (
	"bytes"
	"errors"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strings"
	"syscall"
	"testing"
	"time"

	"manyfold/internal/guard"
	"manyfold/io/atomicfile"
)

// encodeTo runs encode of csv into out and tables with the given columns.
func encodeTo(t *testing.T, csv, out, tables, columns string, extra ...string) result {
	t.Helper()
	args := append([]string{"encode", csv, "--target", "late", "--columns", columns, "--folds", "2",
		"--out", out, "--tables", tables}, extra...)
	return runCLI(t, args...)
}

// TestTablesReplacedWhole: the tables directory is replaced as a unit, so
// the table of a column encoded before and not now does not stay beside
// the new manifest; a directory of other files, an output or an input
// inside --tables, and --json and --report naming one file are refused.
func TestTablesReplacedWhole(t *testing.T) {
	dir := t.TempDir()
	csv := writeFile(t, dir, "ship.csv", shipmentsCSV(200))
	out, tables := filepath.Join(dir, "enc.csv"), filepath.Join(dir, "tables")
	if r := encodeTo(t, csv, out, tables, "postcode,sender"); r.code != exitOK {
		t.Fatalf("exit %d: %s", r.code, r.stderr)
	}
	if got := dirEntries(t, tables); !slices.Equal(got, []string{"01-postcode.parquet", "02-sender.parquet", "manifest.json"}) {
		t.Fatalf("tables: %v", got)
	}
	if r := encodeTo(t, csv, out, tables, "route"); r.code != exitOK {
		t.Fatalf("exit %d: %s", r.code, r.stderr)
	}
	if got := dirEntries(t, tables); !slices.Equal(got, []string{"01-route.parquet", "manifest.json"}) {
		t.Errorf("after encoding another column the tables directory holds %v", got)
	}
	noTempFiles(t, dir)

	other := filepath.Join(dir, "docs")
	os.Mkdir(other, 0o755)
	writeFile(t, other, "notes.txt", "keep me")
	for _, c := range []struct {
		name string
		args []string
		code int
		want string
	}{
		{"a directory of other files", []string{"encode", csv, "--target", "late", "--columns", "route", "--out", out, "--tables", other},
			exitUsage, "holds notes.txt, which is not a mapping table"},
		{"the output inside --tables", []string{"encode", csv, "--target", "late", "--columns", "route", "--out", filepath.Join(tables, "enc.csv"), "--tables", tables},
			exitUsage, "is inside --tables"},
		{"the input inside --tables", []string{"encode", filepath.Join(tables, "01-route.parquet"), "--target", "late", "--columns", "route", "--out", out, "--tables", tables},
			exitUsage, "is inside --tables"},
		{"merge into a directory of other files", []string{"merge", tables, tables, "--tables", other},
			exitUsage, "holds notes.txt"},
		{"--json and --report one file", []string{"compare", csv, "--target", "late", "--columns", "route", "--json", filepath.Join(dir, "r"), "--report", filepath.Join(dir, ".", "r")},
			exitUsage, "--json and --report both name"},
	} {
		r := runCLI(t, c.args...)
		if r.code != c.code || !strings.Contains(r.stderr, c.want) || strings.Count(r.stderr, "\n") != 1 {
			t.Errorf("%s: exit %d, stderr %q; want %d with %q", c.name, r.code, r.stderr, c.code, c.want)
		}
	}
	if b, err := os.ReadFile(filepath.Join(other, "notes.txt")); err != nil || string(b) != "keep me" {
		t.Errorf("the refused directory was touched: %q, %v", b, err)
	}
	if got := dirEntries(t, tables); !slices.Equal(got, []string{"01-route.parquet", "manifest.json"}) {
		t.Errorf("after the refusals the tables directory holds %v", got)
	}
}

// TestFailedOutputKeepsTables: when the output fails part way (its reader
// goes away: a FIFO closed early), the tables directory keeps the tables
// of the earlier run, and no staged directory or temporary file remains.
func TestFailedOutputKeepsTables(t *testing.T) {
	dir := t.TempDir()
	csv := writeFile(t, dir, "ship.csv", shipmentsCSV(20000))
	tables := filepath.Join(dir, "tables")
	if r := encodeTo(t, csv, filepath.Join(dir, "first.csv"), tables, "postcode"); r.code != exitOK {
		t.Fatalf("exit %d: %s", r.code, r.stderr)
	}
	before := snapshot(t, tables)
	fifo := filepath.Join(dir, "out.csv")
	if err := syscall.Mkfifo(fifo, 0o600); err != nil {
		t.Skip("no FIFOs here:", err)
	}
	go func() {
		f, err := os.Open(fifo)
		if err != nil {
			return
		}
		f.Read(make([]byte, 10))
		f.Close()
	}()
	r := encodeTo(t, csv, fifo, tables, "postcode,sender")
	if r.code != exitOutput || !strings.Contains(r.stderr, "broken pipe") {
		t.Errorf("exit %d, stderr %q; want %d, a broken pipe", r.code, r.stderr, exitOutput)
	}
	if fi, err := os.Lstat(fifo); err != nil || fi.Mode()&os.ModeNamedPipe == 0 {
		t.Errorf("the FIFO was replaced")
	}
	if after := snapshot(t, tables); !mapsEqual(before, after) {
		t.Errorf("a failed output changed the tables: %v -> %v", keys(before), keys(after))
	}
	noTempFiles(t, dir)
}

func mapsEqual(a, b map[string][]byte) bool {
	if len(a) != len(b) {
		return false
	}
	for k, v := range a {
		if !bytes.Equal(v, b[k]) {
			return false
		}
	}
	return true
}

func keys(m map[string][]byte) []string {
	var out []string
	for k := range m {
		out = append(out, k)
	}
	slices.Sort(out)
	return out
}

// TestCompareWritesBothOrNeither: when the report cannot be written, the
// JSON result is not written either.
func TestCompareWritesBothOrNeither(t *testing.T) {
	dir := t.TempDir()
	csv := writeFile(t, dir, "ship.csv", shipmentsCSV(300))
	json := filepath.Join(dir, "r.json")
	r := runCLI(t, "compare", csv, "--target", "late", "--columns", "postcode", "--folds", "2", "--inner-folds", "2",
		"--candidates", "prior,freq", "--json", json, "--report", filepath.Join(dir, "missing", "r.html"))
	if r.code != exitOutput {
		t.Errorf("exit %d, want %d: %s", r.code, exitOutput, r.stderr)
	}
	if _, err := os.Stat(json); err == nil {
		t.Errorf("the JSON result was written though the report was not")
	}
	if strings.Contains(r.stderr, ".tmp-") || !strings.Contains(r.stderr, "missing/r.html: no such file or directory") {
		t.Errorf("the message %q should name the report, not its temporary file", r.stderr)
	}
	noTempFiles(t, dir)
}

// TestOutputModes: outputs are created with the user's umask (0666 and
// 0777 less it), and an output that replaces a file keeps its mode.
func TestOutputModes(t *testing.T) {
	dir := t.TempDir()
	csv := writeFile(t, dir, "ship.csv", shipmentsCSV(100))
	out, tables := filepath.Join(dir, "enc.parquet"), filepath.Join(dir, "tables")
	old := syscall.Umask(0o027)
	r := encodeTo(t, csv, out, tables, "postcode")
	syscall.Umask(old)
	if r.code != exitOK {
		t.Fatalf("exit %d: %s", r.code, r.stderr)
	}
	perm := func(p string) os.FileMode {
		fi, err := os.Stat(p)
		if err != nil {
			t.Fatal(err)
		}
		return fi.Mode().Perm()
	}
	for p, want := range map[string]os.FileMode{out: 0o640, tables: 0o750,
		filepath.Join(tables, "manifest.json"): 0o640, filepath.Join(tables, "01-postcode.parquet"): 0o640} {
		if got := perm(p); got != want {
			t.Errorf("%s: mode %03o under umask 027, want %03o", filepath.Base(p), got, want)
		}
	}
	// A private output stays private when written again.
	os.Chmod(out, 0o600)
	old = syscall.Umask(0o022)
	r = encodeTo(t, csv, out, tables, "postcode")
	syscall.Umask(old)
	if r.code != exitOK {
		t.Fatalf("exit %d: %s", r.code, r.stderr)
	}
	if got := perm(out); got != 0o600 {
		t.Errorf("a 0600 output rewritten has mode %03o", got)
	}
	if got := perm(tables); got != 0o750 {
		t.Errorf("the tables directory rewritten has mode %03o, want its old 0750", got)
	}
}

// TestExitCodesOfUnreadableInputs: a directory given as the input and
// Parquet on standard input cannot be read as a table: exit 3.
func TestExitCodesOfUnreadableInputs(t *testing.T) {
	dir := t.TempDir()
	csv := writeFile(t, dir, "ship.csv", shipmentsCSV(50))
	pq := filepath.Join(dir, "ship.parquet")
	if r := encodeTo(t, csv, pq, filepath.Join(dir, "t"), "postcode"); r.code != exitOK {
		t.Fatalf("exit %d: %s", r.code, r.stderr)
	}
	data, _ := os.ReadFile(pq)
	for _, c := range []struct {
		stdin []byte
		args  []string
		want  string
	}{
		{nil, []string{"scan", filepath.Join(dir, "t", "*.json.none")}, ": holds no table files"},
		{data, []string{"scan", "-"}, "stdin: Parquet cannot be read from standard input"},
		{data, []string{"apply", "-", "--tables", filepath.Join(dir, "t"), "--out", filepath.Join(dir, "o.csv")}, "stdin: Parquet cannot be read from standard input"},
	} {
		r := runStdin(t, c.stdin, c.args...)
		if r.code != exitInput || !strings.Contains(r.stderr, c.want) {
			t.Errorf("%v: exit %d, stderr %q; want %d with %q", c.args, r.code, r.stderr, exitInput, c.want)
		}
	}
}

// TestPanicIsInternalError: a panic, on the command's goroutine or on a
// worker's, ends the run with one line and exit 1, the temporary files
// removed; MANYFOLD_DEBUG adds the stack.
func TestPanicIsInternalError(t *testing.T) {
	dir := t.TempDir()
	saved := commands
	defer func() { commands = saved }()
	commands = append(slices.Clone(saved),
		command{"boom", func([]string) error {
			f, err := atomicfile.Create(filepath.Join(dir, "out.csv"))
			if err != nil {
				return err
			}
			f.Write([]byte("half"))
			var m map[string]int
			m["x"]++
			return nil
		}},
		command{"boom-worker", func([]string) error {
			var g guard.Group
			g.Go(func() { panic(errors.New("worker bug")) })
			g.Wait()
			return nil
		}})
	r := runCLI(t, "boom")
	want := "manyfold boom: internal error: assignment to entry in nil map; please report it with the command line\n"
	if r.code != exitFailure || r.stderr != want {
		t.Errorf("exit %d, stderr %q; want %d, %q", r.code, r.stderr, exitFailure, want)
	}
	noTempFiles(t, dir)
	t.Setenv("MANYFOLD_DEBUG", "1")
	r = runCLI(t, "boom-worker")
	if r.code != exitFailure || !strings.HasPrefix(r.stderr, "manyfold boom-worker: internal error: worker bug; please report it") ||
		!strings.Contains(r.stderr, "goroutine") {
		t.Errorf("exit %d, stderr %q; want %d, the line and the stack", r.code, r.stderr, exitFailure)
	}
}

// TestMainProcess is not a test: it runs main with the arguments after
// "--" when the environment asks for it, so that other tests can run
// manyfold as a process of its own (standard output, signals, exit codes).
func TestMainProcess(t *testing.T) {
	if os.Getenv("MANYFOLD_TEST_MAIN") != "1" {
		t.Skip("runs only as a subprocess of another test")
	}
	i := slices.Index(os.Args, "--")
	os.Args = append([]string{"manyfold"}, os.Args[i+1:]...)
	main()
}

// manyfoldCmd returns a command that runs manyfold with args in a process
// of its own.
func manyfoldCmd(args ...string) *exec.Cmd {
	cmd := exec.Command(os.Args[0], append([]string{"-test.run=^TestMainProcess$", "--"}, args...)...)
	cmd.Env = append(os.Environ(), "MANYFOLD_TEST_MAIN=1", "GOGC=100")
	return cmd
}

// TestOutStdout: --out - writes the table to standard output (in every
// format: the writers never seek), and needs --format.
func TestOutStdout(t *testing.T) {
	dir := t.TempDir()
	csv := writeFile(t, dir, "ship.csv", shipmentsCSV(300))
	ref := filepath.Join(dir, "ref.csv")
	if r := encodeTo(t, csv, ref, filepath.Join(dir, "t0"), "postcode"); r.code != exitOK {
		t.Fatalf("exit %d: %s", r.code, r.stderr)
	}
	want := readTable(t, ref)
	for _, f := range []string{"csv", "parquet", "arrow"} {
		cmd := manyfoldCmd("encode", csv, "--target", "late", "--columns", "postcode", "--folds", "2",
			"--out", "-", "--format", f, "--tables", filepath.Join(dir, "t-"+f))
		var stdout, stderr bytes.Buffer
		cmd.Stdout, cmd.Stderr = &stdout, &stderr
		cmd.Dir = dir
		if err := cmd.Run(); err != nil {
			t.Fatalf("--out - --format %s: %v: %s", f, err, stderr.String())
		}
		if !strings.Contains(stderr.String(), "; wrote standard output and ") {
			t.Errorf("--format %s: the summary %q does not name standard output", f, stderr.String())
		}
		got := filepath.Join(dir, "got."+f)
		os.WriteFile(got, stdout.Bytes(), 0o644)
		if g := readTable(t, got); fmt.Sprint(g) != fmt.Sprint(want) {
			t.Errorf("--format %s: standard output differs from the file output", f)
		}
		if _, err := os.Stat(filepath.Join(dir, "-")); err == nil {
			t.Fatalf("a file named - was written")
		}
	}
	// A reader that goes away: exit 5, and the tables are not committed.
	big := writeFile(t, dir, "big.csv", shipmentsCSV(400000))
	cmd := manyfoldCmd("encode", big, "--target", "late", "--columns", "postcode", "--folds", "2",
		"--out", "-", "--format", "csv", "--tables", filepath.Join(dir, "t-pipe"))
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	stdout, err := cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	stdout.Read(make([]byte, 100))
	stdout.Close()
	err = cmd.Wait()
	var ee *exec.ExitError
	if !errors.As(err, &ee) || ee.ExitCode() != exitOutput || !strings.Contains(stderr.String(), "broken pipe") {
		t.Errorf("standard output closed early: %v, stderr %q; want exit %d, a broken pipe", err, stderr.String(), exitOutput)
	}
	if _, err := os.Stat(filepath.Join(dir, "t-pipe")); err == nil {
		t.Errorf("the tables were committed though the output was not")
	}
	noTempFiles(t, dir)
	r := runCLI(t, "encode", csv, "--target", "late", "--columns", "postcode", "--out", "-", "--tables", filepath.Join(dir, "t"))
	if r.code != exitUsage || !strings.Contains(r.stderr, "--out - writes to standard output: give its format with --format") {
		t.Errorf("--out - without --format: exit %d, %q", r.code, r.stderr)
	}
}

// bigCSV writes a CSV of rows rows whose encoding takes a while.
func bigCSV(t *testing.T, path string, rows int) {
	t.Helper()
	var b bytes.Buffer
	b.WriteString("id,postcode,sender,late\n")
	for i := 0; i < rows; i++ {
		fmt.Fprintf(&b, "%d,PC%05d,S%d,%d\n", i, (i*7919)%50000, i%997, (i*31+i/7)%3%2)
	}
	if err := os.WriteFile(path, b.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
}

// waitFor polls until cond holds or 60 seconds pass.
func waitFor(t *testing.T, what string, cond func() bool) {
	t.Helper()
	for start := time.Now(); time.Since(start) < 60*time.Second; time.Sleep(5 * time.Millisecond) {
		if cond() {
			return
		}
	}
	t.Fatalf("gave up waiting for %s", what)
}

// hasTemp reports whether dir holds a name starting with prefix.
func hasTemp(dir, prefix string) bool {
	es, _ := os.ReadDir(dir)
	for _, e := range es {
		if strings.HasPrefix(e.Name(), prefix) {
			return true
		}
	}
	return false
}

// TestSignalsRemoveTemporaryFiles: SIGINT and SIGTERM during a run remove
// the temporary output, the staged tables and the spool of standard input,
// and exit 130 and 143.
func TestSignalsRemoveTemporaryFiles(t *testing.T) {
	if testing.Short() {
		t.Skip("writes a large input")
	}
	dir := t.TempDir()
	in := filepath.Join(dir, "big.csv")
	bigCSV(t, in, 1_500_000)
	for _, s := range []struct {
		sig  syscall.Signal
		code int
	}{{syscall.SIGINT, 130}, {syscall.SIGTERM, 143}} {
		out := filepath.Join(dir, "out")
		os.Mkdir(out, 0o755)
		cmd := manyfoldCmd("encode", in, "--target", "late", "--columns", "id,postcode,sender", "--methods", "target:eb+freq",
			"--out", filepath.Join(out, "enc.csv"), "--tables", filepath.Join(out, "tables"))
		var stderr bytes.Buffer
		cmd.Stderr = &stderr
		if err := cmd.Start(); err != nil {
			t.Fatal(err)
		}
		// The output's temporary file exists once the fit is done, the
		// staged tables beside it.
		waitFor(t, "the temporary output", func() bool { return hasTemp(out, ".enc.csv.tmp-") })
		cmd.Process.Signal(s.sig)
		err := cmd.Wait()
		var ee *exec.ExitError
		if !errors.As(err, &ee) || ee.ExitCode() != s.code {
			t.Errorf("%v: %v, want exit %d; stderr %s", s.sig, err, s.code, stderr.String())
		}
		if got := dirEntries(t, out); len(got) != 0 {
			t.Errorf("%v: left behind %v", s.sig, got)
		}
		if !strings.Contains(stderr.String(), "temporary files removed") {
			t.Errorf("%v: stderr %q", s.sig, stderr.String())
		}
	}

	// Standard input: the spool is removed.
	tmp := t.TempDir()
	cmd := manyfoldCmd("encode", "-", "--target", "late", "--columns", "postcode", "--out", filepath.Join(dir, "x.csv"), "--tables", filepath.Join(dir, "xt"))
	cmd.Env = append(cmd.Env, "TMPDIR="+tmp)
	stdin, err := cmd.StdinPipe()
	if err != nil {
		t.Fatal(err)
	}
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	stdin.Write([]byte("postcode,late\nA,1\nB,0\n")) // and the pipe stays open
	waitFor(t, "the spool", func() bool { return hasTemp(tmp, "manyfold-stdin-") })
	cmd.Process.Signal(syscall.SIGTERM)
	err = cmd.Wait()
	stdin.Close()
	var ee *exec.ExitError
	if !errors.As(err, &ee) || ee.ExitCode() != 143 {
		t.Errorf("SIGTERM while spooling: %v, want exit 143", err)
	}
	if got := dirEntries(t, tmp); len(got) != 0 {
		t.Errorf("the spool was left behind: %v", got)
	}
}
