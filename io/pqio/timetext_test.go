package pqio

import (
	"bytes"
	"math/rand"
	"os"
	"path/filepath"
	"testing"
	"time"

	"github.com/parquet-go/parquet-go"
	"github.com/parquet-go/parquet-go/format"

	"manyfold/io/csvio"
	"manyfold/io/table"
)

// timeRow holds dates and timestamps of every unit, dictionary encoded
// and PLAIN, optional and required, adjusted to UTC and not.
type timeRow struct {
	Day      int32  `parquet:"day,date"`
	DayDict  *int32 `parquet:"day_dict,date,optional,dict"`
	Millis   int64  `parquet:"ms,timestamp(millisecond)"`
	Micros   *int64 `parquet:"us,timestamp(microsecond),optional"`
	MicDict  int64  `parquet:"us_dict,timestamp(microsecond),dict"`
	Nanos    int64  `parquet:"ns,timestamp(nanosecond)"`
	LocalMic int64  `parquet:"local,timestamp(microsecond:local)"`
}

// timeRows returns n rows of random dates and times from 1900 to 2100
// (some before 1970, so negative), with whole seconds and a null now and
// then, and a dictionary column of few values.
func timeRows(n int) []timeRow {
	rng := rand.New(rand.NewSource(7))
	const span = 200 * 365 * 86400 // seconds
	base := int64(-70 * 365 * 86400)
	rows := make([]timeRow, n)
	for i := range rows {
		sec := base + rng.Int63n(span)
		frac := rng.Int63n(1e9)
		if i%3 == 0 {
			frac = 0 // no fraction: none written
		}
		day := int32(sec / 86400)
		us := sec*1e6 + frac/1e3
		rows[i] = timeRow{Day: day, Millis: sec*1e3 + frac/1e6, Nanos: sec*1e9 + frac,
			MicDict: []int64{0, -1, 1_700_000_000_123_000, 86_400_000_000}[i%4], LocalMic: us}
		if i%5 != 1 {
			d := day / 7
			rows[i].DayDict = &d
			rows[i].Micros = &us
		}
	}
	return rows
}

// wantTimeText is the expected text of each column of r: from the
// standard library's time.Unix* constructors and its RFC 3339 layout with
// nanoseconds (which drops a zero fraction and trailing zeros), not from
// the reader's own conversion.
func wantTimeText(r timeRow) []cell {
	date := func(d int32) string { return time.Unix(int64(d)*86400, 0).UTC().Format(time.DateOnly) }
	ts := func(t time.Time) string { return t.UTC().Format(time.RFC3339Nano) }
	out := []cell{{text: date(r.Day)}, {null: true}, {text: ts(time.UnixMilli(r.Millis))}, {null: true},
		{text: ts(time.UnixMicro(r.MicDict))}, {text: ts(time.Unix(0, r.Nanos))},
		{text: time.UnixMicro(r.LocalMic).UTC().Format("2006-01-02T15:04:05.999999999")}}
	if r.DayDict != nil {
		out[1] = cell{text: date(*r.DayDict)}
	}
	if r.Micros != nil {
		out[3] = cell{text: ts(time.UnixMicro(*r.Micros))}
	}
	return out
}

// writeTimeFile writes rows with parquet-go's own writer (pages of 1,000
// rows at most, so that a batch spans pages).
func writeTimeFile(t *testing.T, rows []timeRow) []byte {
	t.Helper()
	var buf bytes.Buffer
	w := parquet.NewGenericWriter[timeRow](&buf, parquet.PageBufferSize(4096))
	if _, err := w.Write(rows); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
}

// TestDatesAndTimestampsAsText reads DATE and TIMESTAMP columns (every
// unit, dictionary and PLAIN pages, nulls) as ISO 8601 text, writes them
// to CSV and reads the CSV back: the same texts.
func TestDatesAndTimestampsAsText(t *testing.T) {
	rows := timeRows(5000)
	data := writeTimeFile(t, rows)
	r := openBytes(t, "times.parquet", data)
	for _, f := range r.Schema().Fields {
		if f.Kind != table.String {
			t.Errorf("column %s is %s, want text", f.Name, f.Kind)
		}
	}
	schema := table.Schema{Fields: append([]table.Field(nil), r.Schema().Fields...)}
	var csvBuf bytes.Buffer
	cw, err := csvio.NewWriter(&csvBuf, &schema, csvio.WriterOptions{})
	if err != nil {
		t.Fatal(err)
	}
	res := readAllWith(t, r, cw.Write)
	r.Close()
	if err := cw.Close(); err != nil {
		t.Fatal(err)
	}
	check := func(how string, cols [][]cell) {
		t.Helper()
		for i, row := range rows {
			for c, want := range wantTimeText(row) {
				if got := cols[c][i]; got != want {
					t.Fatalf("%s: row %d column %s: %v, want %v", how, i+1, schema.Fields[c].Name, got, want)
				}
			}
		}
	}
	check("parquet", res.cols)
	sawDict := false
	for _, f := range res.forms[4] {
		sawDict = sawDict || f == table.FormDict
	}
	if !sawDict {
		t.Error("the dictionary timestamp column never came as a dictionary")
	}
	cr, err := csvio.NewReader(&csvBuf, "times.csv", csvio.Options{})
	if err != nil {
		t.Fatal(err)
	}
	check("csv", readAll(t, cr).cols)
}

// readAllWith reads r like readAll, handing each batch to f too.
func readAllWith(t *testing.T, r table.Reader, f func(*table.Batch) error) readResult {
	t.Helper()
	return readAll(t, &tee{Reader: r, f: f, t: t})
}

type tee struct {
	table.Reader
	f func(*table.Batch) error
	t *testing.T
}

func (e *tee) Next() (*table.Batch, error) {
	b, err := e.Reader.Next()
	if err == nil {
		if err := e.f(b); err != nil {
			e.t.Fatal(err)
		}
	}
	return b, err
}

// TestTimeColumnsCopiedUnchanged: a Parquet output that copies the date
// and timestamp columns chunk by chunk keeps their types (INT32 DATE,
// INT64 TIMESTAMP), so the copy reads as the input does.
func TestTimeColumnsCopiedUnchanged(t *testing.T) {
	rows := timeRows(3000)
	path := filepath.Join(t.TempDir(), "in.parquet")
	if err := os.WriteFile(path, writeTimeFile(t, rows), 0o644); err != nil {
		t.Fatal(err)
	}
	s, err := OpenSource(path)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	r, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	fields := r.Schema().Fields
	want := readAll(t, r).cols
	r.Close()
	copied := make([]bool, len(fields))
	for i := range copied {
		copied[i] = true
	}
	var buf bytes.Buffer
	w, err := NewWriter(&buf, &table.Schema{Fields: fields}, WriterOptions{Source: s, Copy: copied})
	if err != nil {
		t.Fatal(err)
	}
	if err := w.Write(&table.Batch{Rows: int(s.NumRows()), FirstRow: 1, Cols: make([]table.Column, len(fields))}); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	pf, err := parquet.OpenFile(bytes.NewReader(buf.Bytes()), int64(buf.Len()))
	if err != nil {
		t.Fatal(err)
	}
	for _, col := range pf.Root().Columns() {
		lt := col.Type().LogicalType()
		_, date := lt.Value.(*format.DateType)
		_, ts := lt.Value.(*format.TimestampType)
		if lt == nil || (!date && !ts) {
			t.Errorf("copied column %s has logical type %v, want its DATE or TIMESTAMP", col.Name(), lt)
		}
	}
	got := readAll(t, openBytes(t, "out.parquet", buf.Bytes())).cols
	for c := range want {
		for i := range want[c] {
			if got[c][i] != want[c][i] {
				t.Fatalf("column %s row %d: copy %v, input %v", fields[c].Name, i+1, got[c][i], want[c][i])
			}
		}
	}
}

// TestTimestampTextEdges: the fraction at every unit, before 1970 and
// past 9999, against the standard library.
func TestTimestampTextEdges(t *testing.T) {
	for _, tc := range []struct {
		perSecond int64
		v         int64
		want      string
	}{
		{1e3, 0, "1970-01-01T00:00:00Z"},
		{1e3, -1, "1969-12-31T23:59:59.999Z"},
		{1e3, 1_796_407_081_000, "2026-12-04T17:58:01Z"},
		{1e3, 1_796_407_081_500, "2026-12-04T17:58:01.5Z"},
		{1e6, 1_796_407_081_000_010, "2026-12-04T17:58:01.00001Z"},
		{1e9, -1_000_000_001, "1969-12-31T23:59:58.999999999Z"},
		{1e6, 1 << 62, time.UnixMicro(1 << 62).UTC().Format(time.RFC3339Nano)},
		{1e3, -1 << 63, time.UnixMilli(-1 << 63).UTC().Format(time.RFC3339Nano)},
	} {
		if got := string(timestampText(tc.perSecond, true)(nil, tc.v)); got != tc.want {
			t.Errorf("%d units of 1/%d s: %s, want %s", tc.v, tc.perSecond, got, tc.want)
		}
	}
	if got := string(appendDate(nil, 20791)); got != "2026-12-04" {
		t.Errorf("day 20791: %s, want 2026-12-04", got)
	}
}
