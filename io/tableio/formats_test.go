package tableio

import (
	"bytes"
	"compress/gzip"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/klauspost/compress/zstd"

	"manyfold/io/csvio"
	"manyfold/io/table"
)

// writeTable writes testBatch to path (format by extension) and returns
// the file's bytes.
func writeTable(t *testing.T, path string, opts WriteOptions) []byte {
	t.Helper()
	out, err := Create(path, testSchema, opts)
	if err != nil {
		t.Fatal(err)
	}
	if err := out.Write(testBatch()); err != nil {
		t.Fatal(err)
	}
	if err := out.Commit(); err != nil {
		t.Fatal(err)
	}
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return data
}

// readBack opens path and checks it holds testBatch's rows.
func readBack(t *testing.T, path string, opts ReadOptions) {
	t.Helper()
	r, err := Open(path, opts)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	checkTable(t, r, testSchema, testWant)
}

// unpack returns the text of a CSV output, decompressed as c says.
func unpack(t *testing.T, data []byte, c Compression) string {
	t.Helper()
	switch c {
	case Gzip:
		zr, err := gzip.NewReader(bytes.NewReader(data))
		if err != nil {
			t.Fatalf("not gzip: %v", err)
		}
		var b bytes.Buffer
		if _, err := b.ReadFrom(zr); err != nil {
			t.Fatal(err)
		}
		return b.String()
	case Zstd:
		zr, err := zstd.NewReader(bytes.NewReader(data))
		if err != nil {
			t.Fatalf("not zstd: %v", err)
		}
		defer zr.Close()
		var b bytes.Buffer
		if _, err := b.ReadFrom(zr); err != nil {
			t.Fatalf("not zstd: %v", err)
		}
		return b.String()
	}
	return string(data)
}

// TestDelimitedAndCompressedRoundTrip writes the test table to .tsv,
// .csv.gz, .csv.zst, .tsv.gz and .tsv.zst, checks the bytes (tabs for
// .tsv, the compressed stream holding the same text as the plain file) and
// reads each back by its extension and content.
func TestDelimitedAndCompressedRoundTrip(t *testing.T) {
	dir := t.TempDir()
	plainCSV := string(writeTable(t, filepath.Join(dir, "plain.csv"), WriteOptions{}))
	plainTSV := string(writeTable(t, filepath.Join(dir, "plain.tsv"), WriteOptions{}))
	if first, _, _ := strings.Cut(plainTSV, "\n"); first != "postcode\tparcels\tcost\tlate" {
		t.Fatalf(".tsv header %q, want tab-separated", first)
	}
	wantTSV := "postcode\tparcels\tcost\tlate\n\t3\t4.25\ttrue\nPC-10452\t\t0.1\tfalse\n" +
		"\"\"\t-12\t\ttrue\nPC-00501\t0\t-7.5\t\nPC-7, rear\t\t1e+21\t\n"
	if plainTSV != wantTSV {
		t.Errorf(".tsv output\n%s\nwant\n%s", plainTSV, wantTSV)
	}
	for _, tc := range []struct {
		file  string
		codec Compression
		plain string
	}{
		{"t.tsv", Uncompressed, plainTSV},
		{"t.csv.gz", Gzip, plainCSV},
		{"t.csv.zst", Zstd, plainCSV},
		{"t.tsv.gz", Gzip, plainTSV},
		{"t.TSV.zst", Zstd, plainTSV},
	} {
		t.Run(tc.file, func(t *testing.T) {
			path := filepath.Join(dir, tc.file)
			if got := CompressionOf(path); got != tc.codec {
				t.Errorf("CompressionOf = %q, want %q", got, tc.codec)
			}
			data := writeTable(t, path, WriteOptions{})
			magic := map[Compression]string{Gzip: "\x1f\x8b", Zstd: "\x28\xb5\x2f\xfd"}[tc.codec]
			if !bytes.HasPrefix(data, []byte(magic)) || (tc.codec != Uncompressed && bytes.Equal(data, []byte(tc.plain))) {
				t.Errorf("%s starts % x, want the %s magic", tc.file, data[:min(4, len(data))], tc.codec)
			}
			if got := unpack(t, data, tc.codec); got != tc.plain {
				t.Errorf("%s unpacks to\n%s\nwant\n%s", tc.file, got, tc.plain)
			}
			if names := dirNames(t, dir); len(names) == 0 || strings.Contains(strings.Join(names, " "), ".tmp") {
				t.Errorf("directory after Commit: %v", names)
			}
			readBack(t, path, ReadOptions{})
		})
	}
}

// TestTSVDelimiterGivenWins: an explicit delimiter overrides the .tsv
// extension, for input and output alike.
func TestTSVDelimiterGivenWins(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "semi.tsv")
	data := writeTable(t, path, WriteOptions{CSV: csvio.WriterOptions{Delimiter: ';'}})
	if !strings.HasPrefix(string(data), "postcode;parcels;cost;late\n") {
		t.Fatalf("header %q, want ;-separated", data)
	}
	readBack(t, path, ReadOptions{CSV: csvio.Options{Delimiter: ';'}})
	// Read with the extension's tab, the header is one column.
	r, err := Open(path, ReadOptions{})
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	if n := len(r.Schema().Fields); n != 1 {
		t.Errorf("read with tabs: %d columns, want 1", n)
	}
}

func TestDelimiterOf(t *testing.T) {
	for path, want := range map[string]byte{
		"a.tsv": '\t', "a.TSV": '\t', "a.tsv.gz": '\t', "a.tsv.zst": '\t',
		"a.csv": 0, "a.csv.gz": 0, "a.txt": 0, "tsv": 0, "a.tsv.parquet": 0, "-": 0,
	} {
		if got := DelimiterOf(path); got != want {
			t.Errorf("DelimiterOf(%q) = %q, want %q", path, got, want)
		}
	}
}

// ndjsonTable is testWant as newline-delimited JSON: null, missing keys,
// escapes, and a blank line.
const ndjsonTable = `{"postcode":null,"parcels":3,"cost":4.25,"late":true}
{"postcode":"PC-10452","cost":0.1,"late":false}

{"postcode":"","parcels":-12,"cost":null,"late":true}
  {"late":null,"postcode":"PC-00501","parcels":0,"cost":-7.5}
{"postcode":"PC-7, rear","parcels":null,"cost":1e+21}
`

// TestNDJSONRoundTrip opens newline-delimited JSON by extension (.jsonl,
// .ndjson, whatever the content) and by content (a .txt name), writes it
// as CSV and reads that back: the same values each time.
func TestNDJSONRoundTrip(t *testing.T) {
	dir := t.TempDir()
	for _, name := range []string{"t.jsonl", "t.NDJSON", "t.txt"} {
		t.Run(name, func(t *testing.T) {
			path := filepath.Join(dir, name)
			if err := os.WriteFile(path, []byte(ndjsonTable), 0o644); err != nil {
				t.Fatal(err)
			}
			r, err := Open(path, ReadOptions{})
			if err != nil {
				t.Fatal(err)
			}
			checkTable(t, r, testSchema, testWant)
			r.Close()

			r, err = Open(path, ReadOptions{})
			if err != nil {
				t.Fatal(err)
			}
			out := filepath.Join(dir, name+".csv")
			w, err := Create(out, r.Schema(), WriteOptions{})
			if err != nil {
				t.Fatal(err)
			}
			if err := table.ForEach(r, w.Write); err != nil {
				t.Fatal(err)
			}
			r.Close()
			if err := w.Commit(); err != nil {
				t.Fatal(err)
			}
			readBack(t, out, ReadOptions{})
		})
	}
	// An .ndjson name with CSV content is read as NDJSON, and says so.
	path := filepath.Join(dir, "csv.ndjson")
	if err := os.WriteFile(path, []byte("a,b\n1,2\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	if _, err := Open(path, ReadOptions{}); err == nil || !strings.Contains(err.Error(), "not start with {") {
		t.Errorf("CSV in an .ndjson file: %v", err)
	}
}

func TestDetectNDJSON(t *testing.T) {
	for head, want := range map[string]Format{
		`{"a":1}`: NDJSON, " \r\n\t{": NDJSON, "\xef\xbb\xbf{": NDJSON, "a,{b}\n": CSV, "[{\"a\":1}]": CSV,
	} {
		if got, err := Detect([]byte(head)); got != want || err != nil {
			t.Errorf("Detect(%q) = %q, %v; want %q", head, got, err, want)
		}
	}
}

// TestCompressedNDJSON: NDJSON compressed with gzip or zstd is read as
// NDJSON, whether its name says so (t.ndjson.gz) or only its decompressed
// bytes do (t.gz), from a file and from standard input; a compressed CSV
// file is still CSV.
func TestCompressedNDJSON(t *testing.T) {
	dir := t.TempDir()
	gz := func(b []byte) []byte {
		var buf bytes.Buffer
		w := gzip.NewWriter(&buf)
		w.Write(b)
		w.Close()
		return buf.Bytes()
	}
	zs := func(b []byte) []byte {
		var buf bytes.Buffer
		w, _ := zstd.NewWriter(&buf)
		w.Write(b)
		w.Close()
		return buf.Bytes()
	}
	for _, c := range []struct {
		name string
		data []byte
	}{
		{"t.ndjson.gz", gz([]byte(ndjsonTable))},
		{"t.gz", gz([]byte(ndjsonTable))},
		{"t.jsonl.zst", zs([]byte(ndjsonTable))},
		{"t.zst", zs([]byte(ndjsonTable))},
	} {
		path := filepath.Join(dir, c.name)
		if err := os.WriteFile(path, c.data, 0o644); err != nil {
			t.Fatal(err)
		}
		r, err := Open(path, ReadOptions{})
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		checkTable(t, r, testSchema, testWant)
		if err := r.Close(); err != nil {
			t.Errorf("%s: close: %v", c.name, err)
		}
		in, err := os.Open(path)
		if err != nil {
			t.Fatal(err)
		}
		old := os.Stdin
		os.Stdin = in
		r, err = Open("-", ReadOptions{})
		os.Stdin = old
		if err != nil {
			t.Fatalf("%s on standard input: %v", c.name, err)
		}
		checkTable(t, r, testSchema, testWant)
		r.Close()
		in.Close()
	}
	// A compressed CSV file stays CSV, with a name or without.
	for _, name := range []string{"c.csv.gz", "c.gz"} {
		path := filepath.Join(dir, name)
		if err := os.WriteFile(path, gz([]byte("a,b\n1,x\n")), 0o644); err != nil {
			t.Fatal(err)
		}
		r, err := Open(path, ReadOptions{})
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		if got := strings.Join(r.Schema().Names(), ","); got != "a,b" {
			t.Errorf("%s: columns %s, want a,b", name, got)
		}
		r.Close()
	}
}
