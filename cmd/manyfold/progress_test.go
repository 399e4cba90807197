package main

import (
	"bytes"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	"golang.org/x/sys/unix"

	"manyfold/internal/evaluate/compare"
	"manyfold/internal/parcels"
	"manyfold/io/table"
	"manyfold/io/tableio"
)

// TestProgressLines: the line of each kind of input and of compare's
// model phase, with the share done and the time left at the rate so far.
func TestProgressLines(t *testing.T) {
	cases := []struct{ got, want string }{
		{rowsLine("fit", 4500000, 10000000, 0, 0, 2*time.Second), "fit: 4,500,000 of 10,000,000 rows (45%), 2.2 M rows/s, 2s left"},
		{rowsLine("encode", 4500000, 0, 540e6, 1.2e9, 3*time.Second), "encode: 4,500,000 rows, 540 MB of 1.2 GB (45%), 1.5 M rows/s, 4s left"},
		{rowsLine("apply", 1234, 0, 0, 0, 2*time.Second), "apply: 1,234 rows, 0.0 M rows/s"},
		// Too early to tell: no time left in the first second.
		{rowsLine("scan", 100, 1000, 0, 0, 500*time.Millisecond), "scan: 100 of 1,000 rows (10%), 0.0 M rows/s"},
		// All read: 100%, nothing left to announce.
		{rowsLine("scan", 10, 0, 900, 900, 90*time.Second), "scan: 10 rows, 900 B of 900 B (100%), 0.0 M rows/s"},
		{modelsLine("compare", compare.ModelStep{Column: "dest_postcode", ColumnNum: 1, Columns: 2, Candidate: 3, Candidates: 7, ModelsDone: 14, Models: 70}, 10*time.Second),
			"compare: models, column 1 of 2 (dest_postcode), candidate 3 of 7, 14 of 70 fits (20%), 40s left"},
		{durationText(3*time.Minute + 5*time.Second), "3m05s"},
		{durationText(2*time.Hour + 7*time.Minute + 59*time.Second), "2h07m"},
		{thousands(-1234567), "-1,234,567"},
		{thousands(999), "999"},
		{bytesText(12345), "12 kB"},
		{bytesText(999), "999 B"},
		{bytesText(2_500_000_000_000), "2.5 TB"},
	}
	for _, c := range cases {
		if c.got != c.want {
			t.Errorf("got  %q\nwant %q", c.got, c.want)
		}
	}
}

// fakeClock is a clock a test moves by hand.
type fakeClock struct{ t time.Time }

func (c *fakeClock) now() time.Time { return c.t }

// TestProgressDraws: on a terminal the line is drawn at once, then at most
// every progressEvery, each time over the last (a carriage return, the line,
// the rest of the old one erased), cut to the terminal's width, and cleared
// at the end; off a terminal nothing is written at all. A CSV file's line
// gives the bytes read of its size, a Parquet file's the rows of its
// total.
func TestProgressDraws(t *testing.T) {
	dir := t.TempDir()
	csvPath := writeFile(t, dir, "routes.csv", strings.Repeat("route,late\n", 1)+strings.Repeat("R1,1\n", 1000))
	pqPath := filepath.Join(dir, "shipments.parquet")
	if err := generate(pqPath, parcels.Config{Rows: 5000, Seed: 1}); err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		path string
		want string
	}{
		{csvPath, "fit: 1,000 rows, 5.0 kB of 5.0 kB (100%)"},
		{pqPath, "fit: 1,000 of 5,000 rows (20%)"},
	} {
		r, err := tableio.Open(c.path, tableio.ReadOptions{})
		if err != nil {
			t.Fatal(err)
		}
		r = table.ReadAhead(r)
		if _, err := r.Next(); err != nil {
			t.Fatal(err)
		}
		clock := &fakeClock{time.Unix(1000, 0)}
		var b bytes.Buffer
		p := startProgress(&b, true, "fit", r, clock.now)
		p.update(1000)
		clock.t = clock.t.Add(50 * time.Millisecond)
		p.update(2000) // too soon: not drawn
		// Drawn once, without a rate: no time had passed.
		if got := b.String(); got != "\r"+c.want+"\033[K" {
			t.Errorf("%s: drew %q, want the line %q once", c.path, got, c.want)
		}
		clock.t = clock.t.Add(2 * time.Second)
		p.width = 20
		p.update(3000)
		if got, want := b.String()[strings.LastIndex(b.String(), "\r"):], "\r"+strings.Replace(c.want, "1,000", "3,000", 1)[:19]+"\033[K"; got != want {
			t.Errorf("%s: redrew %q, want %q (cut to 19 columns)", c.path, got, want)
		}
		p.done()
		if !strings.HasSuffix(b.String(), "\033[K\r\033[K") {
			t.Errorf("%s: the line is not cleared at the end: %q", c.path, b.String())
		}
		r.Close()

		var off bytes.Buffer
		p = startProgress(&off, false, "fit", nil, clock.now)
		p.update(10)
		p.models(compare.ModelStep{ColumnNum: 1, Columns: 1, Candidates: 1, Models: 5})
		p.done()
		if off.Len() != 0 {
			t.Errorf("off a terminal the progress wrote %q", off.String())
		}
	}
}

// TestProgressOffTerminal: when standard error is a file (or /dev/null,
// a character device but no terminal), a run writes no progress: no
// carriage return, no escape.
func TestProgressOffTerminal(t *testing.T) {
	dir := t.TempDir()
	in := writeFile(t, dir, "shipments.csv", shipmentsCSV(500))
	res := mustRun(t, "scan", in)
	if strings.ContainsAny(res.stderr, "\r\033") {
		t.Errorf("scan wrote progress to a file: %q", res.stderr)
	}
	null, err := os.OpenFile(os.DevNull, os.O_WRONLY, 0)
	if err != nil {
		t.Fatal(err)
	}
	defer null.Close()
	if isTerminal(null) {
		t.Errorf("%s is taken for a terminal", os.DevNull)
	}
}

// openPty opens a pseudo-terminal pair of the given width: the master,
// which reads what is written to the terminal, and the terminal itself.
func openPty(t *testing.T, cols uint16) (master, tty *os.File) {
	t.Helper()
	master, err := os.OpenFile("/dev/ptmx", os.O_RDWR|unix.O_NOCTTY, 0)
	if err != nil {
		t.Skipf("no pseudo-terminal: %v", err)
	}
	fd := int(master.Fd())
	if err := unix.IoctlSetPointerInt(fd, unix.TIOCSPTLCK, 0); err != nil {
		master.Close()
		t.Fatal(err)
	}
	n, err := unix.IoctlGetInt(fd, unix.TIOCGPTN)
	if err != nil {
		master.Close()
		t.Fatal(err)
	}
	tty, err = os.OpenFile(fmt.Sprintf("/dev/pts/%d", n), os.O_RDWR|unix.O_NOCTTY, 0)
	if err != nil {
		master.Close()
		t.Fatal(err)
	}
	if err := unix.IoctlSetWinsize(int(tty.Fd()), unix.TIOCSWINSZ, &unix.Winsize{Row: 24, Col: cols}); err != nil {
		t.Fatal(err)
	}
	return master, tty
}

// runOnTerminal runs a command line in-process with standard error on a
// pseudo-terminal of the given width and returns what the terminal
// received.
func runOnTerminal(t *testing.T, cols uint16, args ...string) (int, string) {
	t.Helper()
	t.Setenv("TERM", "xterm")
	master, tty := openPty(t, cols)
	defer master.Close()
	got := make(chan []byte)
	go func() {
		b, _ := io.ReadAll(master) // ends with EIO once the terminal is closed
		got <- b
	}()
	outF, err := os.Create(filepath.Join(t.TempDir(), "stdout"))
	if err != nil {
		t.Fatal(err)
	}
	defer outF.Close()
	oldOut, oldErr := os.Stdout, os.Stderr
	os.Stdout, os.Stderr = outF, tty
	code := run(args)
	os.Stdout, os.Stderr = oldOut, oldErr
	tty.Close()
	return code, string(<-got)
}

// TestProgressOnTerminal: under a pseudo-terminal, scan of a Parquet file
// draws the phase and its rows of the file's total, encode of a CSV file
// the bytes read of its size in both passes, compare the model phase's
// column and candidate; every line is cut to the terminal's width and
// cleared before the command's own lines.
func TestProgressOnTerminal(t *testing.T) {
	dir := t.TempDir()
	pq := filepath.Join(dir, "shipments.parquet")
	if err := generate(pq, parcels.Config{Rows: 20000, Seed: 3}); err != nil {
		t.Fatal(err)
	}
	csvPath := writeFile(t, dir, "shipments.csv", shipmentsCSV(3000))
	cases := []struct {
		args []string
		cols uint16
		want []string
	}{
		{[]string{"scan", pq, "--columns", "route"}, 200, []string{`\rscan: [0-9,]+ of 20,000 rows \(\d+%\)`}},
		{[]string{"encode", csvPath, "--target", "late", "--columns", "postcode", "--out", filepath.Join(dir, "enc.csv"), "--tables", filepath.Join(dir, "tables")}, 200,
			[]string{`\rfit: [0-9,]+ rows, [0-9.]+ kB of [0-9.]+ kB \(100%\)`, `\rencode: [0-9,]+ rows, [0-9.]+ kB of [0-9.]+ kB \(100%\)`}},
		{[]string{"compare", pq, "--target", "late", "--columns", "route,parcel_type", "--candidates", "prior,target:eb", "--folds", "2", "--inner-folds", "2"}, 200,
			[]string{`\rcompare: [0-9,]+ of 20,000 rows`, `\rcompare: models, column 1 of 2 \(route\), candidate 1 of 2, 0 of 8 fits \(0%\)`, `\rcompare: models, column 2 of 2 \(parcel_type\), candidate 1 of 2, 4 of 8 fits \(50%\)`}},
		{[]string{"scan", pq, "--columns", "route"}, 30, []string{`\rscan: [0-9,]+ of 20,000 rows[^\r]*\x1b\[K`}},
	}
	for _, c := range cases {
		code, out := runOnTerminal(t, c.cols, c.args...)
		if code != exitOK {
			t.Fatalf("%s: exit %d: %q", strings.Join(c.args, " "), code, out)
		}
		for _, w := range c.want {
			if !regexp.MustCompile(w).MatchString(out) {
				t.Errorf("%s: the terminal received no %q:\n%q", c.args[0], w, out)
			}
		}
		for _, line := range strings.Split(out, "\r") {
			line, _, drawn := strings.Cut(line, "\033[K")
			if drawn && len(line) > int(c.cols)-1 {
				t.Errorf("%s: a line of %d characters on a terminal of %d: %q", c.args[0], len(line), c.cols, line)
			}
		}
		// The command's own lines come after the progress is cleared.
		if i := strings.LastIndex(out, "\r\033[K"); c.args[0] == "encode" && !strings.Contains(out[i:], "encoded 3000 rows") {
			t.Errorf("encode: the summary is not after the cleared progress:\n%q", out)
		}
	}
}
