package tableio

import (
	"bytes"
	"errors"
	"io"
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"testing"

	"manyfold/io/table"
)

// TestCreateStdout writes each format to standard output, a pipe here (so
// a writer that seeks fails), and reads the bytes back as a table.
func TestCreateStdout(t *testing.T) {
	for _, f := range []Format{CSV, Parquet, Arrow} {
		t.Run(string(f), func(t *testing.T) {
			pr, pw, err := os.Pipe()
			if err != nil {
				t.Fatal(err)
			}
			got := make(chan []byte, 1)
			go func() {
				b, _ := io.ReadAll(pr)
				got <- b
			}()
			old := os.Stdout
			os.Stdout = pw
			out, err := Create(Stdout, testSchema, WriteOptions{Format: f})
			if err == nil {
				err = out.Write(testBatch())
			}
			if err == nil {
				err = out.Commit()
			}
			os.Stdout = old
			pw.Close()
			data := <-got
			if err != nil {
				t.Fatal(err)
			}
			if d, err := Detect(data); d != f || err != nil {
				t.Fatalf("standard output detected as %q, %v", d, err)
			}
			path := filepath.Join(t.TempDir(), "copy")
			os.WriteFile(path, data, 0o644)
			r, err := Open(path, ReadOptions{})
			if err != nil {
				t.Fatal(err)
			}
			defer r.Close()
			checkTable(t, r, testSchema, testWant)
		})
	}
	if _, err := Create(Stdout, testSchema, WriteOptions{}); err == nil || !strings.Contains(err.Error(), "(format csv, parquet or arrow)") {
		t.Errorf("standard output without a format: %v", err)
	}
}

// TestCreateOverFIFO: an existing FIFO is written through, not replaced by
// a regular file.
func TestCreateOverFIFO(t *testing.T) {
	dir := t.TempDir()
	fifo := filepath.Join(dir, "out.csv")
	if err := syscall.Mkfifo(fifo, 0o600); err != nil {
		t.Skip("no FIFOs here:", err)
	}
	got := make(chan []byte, 1)
	go func() {
		b, _ := os.ReadFile(fifo)
		got <- b
	}()
	out, err := Create(fifo, testSchema, WriteOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if err := out.Write(testBatch()); err != nil {
		t.Fatal(err)
	}
	if err := out.Commit(); err != nil {
		t.Fatal(err)
	}
	if b := <-got; !bytes.HasPrefix(b, []byte("postcode,parcels,cost,late\n")) {
		t.Errorf("the FIFO's reader got %q", b)
	}
	if fi, err := os.Lstat(fifo); err != nil || fi.Mode()&os.ModeNamedPipe == 0 {
		t.Errorf("the FIFO was replaced (%v, %v)", fi.Mode(), err)
	}
	if names := dirNames(t, dir); len(names) != 1 {
		t.Errorf("the directory holds %v", names)
	}
}

// TestOpenUnreadable: a directory without table files (a dataset of
// none: table.ErrEmpty), and Parquet on standard input
// (table.ErrUnknownFormat), are inputs that cannot be read as a table
// (exit 3).
func TestOpenUnreadable(t *testing.T) {
	dir := t.TempDir()
	_, err := Open(dir, ReadOptions{})
	if !errors.Is(err, table.ErrEmpty) || err.Error() != dir+": holds no table files" {
		t.Errorf("a directory: %v", err)
	}
	path := filepath.Join(dir, "t.parquet")
	out, err := Create(path, testSchema, WriteOptions{})
	if err != nil {
		t.Fatal(err)
	}
	out.Write(testBatch())
	if err := out.Commit(); err != nil {
		t.Fatal(err)
	}
	in, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer in.Close()
	old := os.Stdin
	os.Stdin = in
	_, err = Open("-", ReadOptions{})
	os.Stdin = old
	if !errors.Is(err, ErrParquetStdin) || !errors.Is(err, table.ErrUnknownFormat) || !strings.HasPrefix(err.Error(), "stdin: Parquet cannot be read from standard input") {
		t.Errorf("Parquet on standard input: %v", err)
	}
}
