package tableio

import (
	"bytes"
	"fmt"
	"os"
	"path/filepath"
	"testing"

	"github.com/klauspost/compress/gzip"

	"manyfold/io/table"
)

// TestInputBytes: a CSV file opened by Open and read ahead tells, through
// the wrappers (table.Find), the bytes read of the file's size: part of it
// while a large file is read, all of it at the end; for a gzip file the
// compressed bytes of the compressed size.
func TestInputBytes(t *testing.T) {
	dir := t.TempDir()
	var b bytes.Buffer
	b.WriteString("id,late\n")
	for i := 0; i < 300000; i++ {
		fmt.Fprintf(&b, "shipment-%07d,%d\n", i, i%2)
	}
	plain := filepath.Join(dir, "big.csv")
	if err := os.WriteFile(plain, b.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	var z bytes.Buffer
	zw := gzip.NewWriter(&z)
	zw.Write(b.Bytes())
	zw.Close()
	gz := filepath.Join(dir, "big.csv.gz")
	if err := os.WriteFile(gz, z.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	// The same rows as newline-delimited JSON, plain and compressed.
	var nj bytes.Buffer
	for i := 0; i < 300000; i++ {
		fmt.Fprintf(&nj, "{\"id\":\"shipment-%07d\",\"late\":%d}\n", i, i%2)
	}
	ndjson := filepath.Join(dir, "big.ndjson")
	if err := os.WriteFile(ndjson, nj.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	z.Reset()
	zw = gzip.NewWriter(&z)
	zw.Write(nj.Bytes())
	zw.Close()
	ndjsonGz := filepath.Join(dir, "big.ndjson.gz")
	if err := os.WriteFile(ndjsonGz, z.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	for _, path := range []string{plain, gz, ndjson, ndjsonGz} {
		fi, _ := os.Stat(path)
		r, err := Open(path, ReadOptions{})
		if err != nil {
			t.Fatal(err)
		}
		r = table.ReadAhead(r)
		ic, ok := table.Find[table.InputCounter](r)
		if !ok {
			t.Fatalf("%s: no table.InputCounter under the reader", path)
		}
		if _, err := r.Next(); err != nil {
			t.Fatal(err)
		}
		read, size := ic.InputBytes()
		if size != fi.Size() || read <= 0 || ((path == plain || path == ndjson) && read >= size) {
			t.Errorf("%s after one batch: read %d of %d; want part of %d", path, read, size, fi.Size())
		}
		for {
			if _, err := r.Next(); err != nil {
				break
			}
		}
		if read, size := ic.InputBytes(); read != fi.Size() || size != fi.Size() {
			t.Errorf("%s at the end: read %d of %d; want %d of %d", path, read, size, fi.Size(), fi.Size())
		}
		r.Close()
	}
	if _, ok := table.Find[table.InputCounter](table.NewMemReader(&table.Schema{})); ok {
		t.Error("a memory reader has an input counter")
	}
}
