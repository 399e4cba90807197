package main

import (
	"bytes"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/parquet-go/parquet-go"

	"manyfold/io/pqio"
	"manyfold/io/table"
	"manyfold/io/tableio"
)

// damagedPageParquet writes a Parquet file of postcode, note and late
// columns, uncompressed, and changes one byte of a note inside its page,
// leaving the page's CRC as it was.
func damagedPageParquet(t *testing.T, dir string) string {
	t.Helper()
	s := &table.Schema{Fields: []table.Field{
		{Name: "postcode", Kind: table.String}, {Name: "note", Kind: table.String}, {Name: "late", Kind: table.Int64},
	}}
	const n = 200
	var pc, note []byte
	pcOff, noteOff := []int32{0}, []int32{0}
	late := make([]int64, n)
	for i := range n {
		pc = fmt.Appendf(pc, "PC%d", i%7)
		note = fmt.Appendf(note, "note-%06d", i)
		pcOff, noteOff = append(pcOff, int32(len(pc))), append(noteOff, int32(len(note)))
		late[i] = int64(i % 3 % 2)
	}
	path := filepath.Join(dir, "shipments.parquet")
	w, err := tableio.Create(path, s, tableio.WriteOptions{Parquet: pqio.WriterOptions{Compression: "none"}})
	if err != nil {
		t.Fatal(err)
	}
	b := &table.Batch{Rows: n, FirstRow: 1, Cols: []table.Column{
		{Form: table.FormText, Data: pc, Offsets: pcOff}, {Form: table.FormText, Data: note, Offsets: noteOff}, {Form: table.FormInt64, Ints: late},
	}}
	if err := w.Write(b); err != nil {
		t.Fatal(err)
	}
	if err := w.Commit(); err != nil {
		t.Fatal(err)
	}
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	at := bytes.Index(data, []byte("note-000042"))
	if at < 0 {
		t.Fatal("note not found in the file")
	}
	data[at+10] = '3' // note-000043 twice, and no other change
	if err := os.WriteFile(path, data, 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

// TestDamagedParquetPage: a page whose bytes no longer match its CRC is
// corrupt input (exit 3), whether the column is read or its chunks are
// copied into a Parquet output, naming the file, column, row group and
// page.
func TestDamagedParquetPage(t *testing.T) {
	runBad(t, []badCase{
		{"scan", func(t *testing.T, dir string) []string {
			return []string{"scan", damagedPageParquet(t, dir), "--columns", "note"}
		}, exitInput, []string{inPlaceholder, `: column "note": row group 1: page 1:`, "page checksum mismatch"}},
		{"encode copying the column", func(t *testing.T, dir string) []string {
			in := damagedPageParquet(t, dir)
			return []string{"encode", in, "--target", "late", "--columns", "postcode",
				"--out", filepath.Join(dir, "out", "enc.parquet"), "--tables", filepath.Join(dir, "out", "tables")}
		}, exitInput, []string{inPlaceholder, `: column "note", row group 1: page 1`, "page checksum mismatch"}},
	})
}

// TestUnsigned64Levels: unsigned 64-bit integers above 2^63 are levels of
// their own, as their unsigned decimal text.
func TestUnsigned64Levels(t *testing.T) {
	type row struct {
		ID uint64 `parquet:"id"`
	}
	var buf bytes.Buffer
	if err := parquet.Write(&buf, []row{{1<<64 - 1}, {1 << 63}, {1<<64 - 1}, {5}}); err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(t.TempDir(), "ids.parquet")
	if err := os.WriteFile(path, buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	res := runCLI(t, "scan", path, "--columns", "id")
	if res.code != 0 {
		t.Fatalf("exit %d: %s", res.code, res.stderr)
	}
	for _, want := range []string{`"18446744073709551615" 2`, `"9223372036854775808" 1`, "3 distinct"} {
		if !strings.Contains(res.stdout, want) {
			t.Errorf("scan output lacks %q:\n%s", want, res.stdout)
		}
	}
}
