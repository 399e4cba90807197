package arrowio

import (
	"bytes"
	"os"
	"path/filepath"
	"testing"
	"time"

	"github.com/apache/arrow/go/v17/arrow"
	"github.com/apache/arrow/go/v17/arrow/array"
	"github.com/apache/arrow/go/v17/arrow/ipc"
	"github.com/apache/arrow/go/v17/arrow/memory"

	"manyfold/io/table"
)

// TestDatesAndTimestampsAsText reads Arrow DATE32, DATE64 and timestamps
// (seconds in UTC, nanoseconds of no zone) as ISO 8601 text, writes the
// table with our writer and reads it back: the same texts, which the
// standard library's time formatting gives too.
func TestDatesAndTimestampsAsText(t *testing.T) {
	schema := arrow.NewSchema([]arrow.Field{
		{Name: "d32", Type: arrow.FixedWidthTypes.Date32, Nullable: true},
		{Name: "d64", Type: arrow.FixedWidthTypes.Date64, Nullable: true},
		{Name: "ts_s", Type: &arrow.TimestampType{Unit: arrow.Second, TimeZone: "UTC"}, Nullable: true},
		{Name: "ts_ns", Type: &arrow.TimestampType{Unit: arrow.Nanosecond}, Nullable: true},
	}, nil)
	days := []int32{20791, -1, 0, 0}
	secs := []int64{1_796_407_081, -1, 0, 0}
	nanos := []int64{1_796_407_081_250_000_000, -1, 5, 0}
	null := []bool{false, false, false, true}
	want := [][]string{
		{"2026-12-04", "1969-12-31", "1970-01-01", ""},
		{"2026-12-04", "1969-12-31", "1970-01-01", ""},
		{"2026-12-04T17:58:01Z", "1969-12-31T23:59:59Z", "1970-01-01T00:00:00Z", ""},
		{"2026-12-04T17:58:01.25", "1969-12-31T23:59:59.999999999", "1970-01-01T00:00:00.000000005", ""},
	}
	for i := range days { // the same from the standard library
		if null[i] {
			continue
		}
		std := []string{time.Unix(int64(days[i])*86400, 0).UTC().Format(time.DateOnly), "",
			time.Unix(secs[i], 0).UTC().Format(time.RFC3339Nano), time.Unix(0, nanos[i]).UTC().Format("2006-01-02T15:04:05.999999999")}
		std[1] = std[0]
		for c := range std {
			if std[c] != want[c][i] {
				t.Fatalf("column %d row %d: the standard library says %s, the test %s", c, i, std[c], want[c][i])
			}
		}
	}
	mem := memory.NewGoAllocator()
	b := array.NewRecordBuilder(mem, schema)
	defer b.Release()
	for i := range days {
		if null[i] {
			for c := range schema.Fields() {
				b.Field(c).AppendNull()
			}
			continue
		}
		b.Field(0).(*array.Date32Builder).Append(arrow.Date32(days[i]))
		b.Field(1).(*array.Date64Builder).Append(arrow.Date64(int64(days[i]) * 86_400_000))
		b.Field(2).(*array.TimestampBuilder).Append(arrow.Timestamp(secs[i]))
		b.Field(3).(*array.TimestampBuilder).Append(arrow.Timestamp(nanos[i]))
	}
	rec := b.NewRecord()
	defer rec.Release()
	var buf bytes.Buffer
	w := ipc.NewWriter(&buf, ipc.WithSchema(schema)) // a stream
	if err := w.Write(rec); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	in := filepath.Join(dir, "in.arrow")
	if err := os.WriteFile(in, buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	check := func(path string) {
		t.Helper()
		r, err := Open(path)
		if err != nil {
			t.Fatal(err)
		}
		defer r.Close()
		for _, f := range r.Schema().Fields {
			if f.Kind != table.String {
				t.Errorf("%s: column %s is %s, want text", path, f.Name, f.Kind)
			}
		}
		got := make([][]string, 4)
		err = table.ForEach(r, func(b *table.Batch) error {
			for c := range b.Cols {
				for i := 0; i < b.Rows; i++ {
					got[c] = append(got[c], string(b.Cols[c].AppendText(nil, i)))
					if b.Cols[c].IsNull(i) != null[len(got[c])-1] {
						t.Errorf("%s: column %d row %d: null %v", path, c, i, b.Cols[c].IsNull(i))
					}
				}
			}
			return nil
		})
		if err != nil {
			t.Fatal(err)
		}
		for c := range want {
			for i := range want[c] {
				if !null[i] && got[c][i] != want[c][i] {
					t.Errorf("%s: column %d row %d: %q, want %q", path, c, i, got[c][i], want[c][i])
				}
			}
		}
	}
	check(in)
	// Written by our writer (as text) and read back.
	r, err := Open(in)
	if err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(dir, "out.arrow")
	f, err := os.Create(out)
	if err != nil {
		t.Fatal(err)
	}
	tw, err := NewWriter(f, r.Schema())
	if err != nil {
		t.Fatal(err)
	}
	if err := table.ForEach(r, tw.Write); err != nil {
		t.Fatal(err)
	}
	r.Close()
	if err := tw.Close(); err != nil {
		t.Fatal(err)
	}
	f.Close()
	check(out)
}
