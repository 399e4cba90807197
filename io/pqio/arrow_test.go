package pqio

// Cross-checks against Arrow's own Parquet implementation (pqarrow and its
// file package), an independent reader and writer; it is imported by the
// tests only.

import (
	"bytes"
	"context"
	"fmt"
	"hash/fnv"
	"io"
	"os"
	"path/filepath"
	"strconv"
	"testing"
	"time"

	"github.com/apache/arrow/go/v17/arrow"
	"github.com/apache/arrow/go/v17/arrow/array"
	"github.com/apache/arrow/go/v17/arrow/memory"
	"github.com/apache/arrow/go/v17/parquet"
	"github.com/apache/arrow/go/v17/parquet/compress"
	"github.com/apache/arrow/go/v17/parquet/file"
	"github.com/apache/arrow/go/v17/parquet/pqarrow"

	"manyfold/io/table"
)

// arrowRead reads a Parquet file with Arrow's reader and calls f for each
// record.
func arrowRead(t testing.TB, data []byte, path string, cols []int, f func(arrow.Record)) *arrow.Schema {
	t.Helper()
	var rdr *file.Reader
	var err error
	if path != "" {
		rdr, err = file.OpenParquetFile(path, false)
	} else {
		rdr, err = file.NewParquetReader(bytes.NewReader(data))
	}
	if err != nil {
		t.Fatalf("arrow open: %v", err)
	}
	defer rdr.Close()
	fr, err := pqarrow.NewFileReader(rdr, pqarrow.ArrowReadProperties{BatchSize: 1 << 16}, memory.DefaultAllocator)
	if err != nil {
		t.Fatalf("arrow reader: %v", err)
	}
	rr, err := fr.GetRecordReader(context.Background(), cols, nil)
	if err != nil {
		t.Fatalf("arrow record reader: %v", err)
	}
	defer rr.Release()
	for rr.Next() {
		f(rr.Record())
	}
	if err := rr.Err(); err != nil && err != io.EOF {
		t.Fatalf("arrow read: %v", err)
	}
	return rr.Schema()
}

// arrowCells gives the canonical cells of an Arrow array.
func arrowCells(t testing.TB, a arrow.Array) []cell {
	t.Helper()
	out := make([]cell, a.Len())
	for i := range out {
		if a.IsNull(i) {
			out[i] = cell{null: true}
			continue
		}
		var s string
		switch a := a.(type) {
		case *array.String:
			s = a.Value(i)
		case *array.Int64:
			s = strconv.FormatInt(a.Value(i), 10)
		case *array.Int32:
			s = strconv.FormatInt(int64(a.Value(i)), 10)
		case *array.Float64:
			s = string(table.AppendFloat(nil, a.Value(i)))
		case *array.Boolean:
			s = strconv.FormatBool(a.Value(i))
		default:
			t.Fatalf("unexpected Arrow array %T", a)
		}
		out[i] = cell{text: s}
	}
	return out
}

// TestArrowReadsOurFiles writes every kind with nulls and checks Arrow's
// reader sees the same columns, in the same order, with the same values.
func TestArrowReadsOurFiles(t *testing.T) {
	const n = 5000
	var fields []table.Field
	var cols []table.Column
	var want [][]cell
	for i, k := range append(kinds, kinds...) {
		cells := sample(k, n, uint64(i+21))
		nullable := i < len(kinds)
		if nullable {
			for j := range cells {
				if j%11 == i || j%101 == 0 {
					cells[j] = cell{null: true}
				}
			}
		}
		fields = append(fields, table.Field{Name: fmt.Sprintf("z%d_%v", 9-i, k), Kind: k, Nullable: nullable})
		cols = append(cols, col(t, k, ownForm(k), cells))
		want = append(want, cells)
	}
	for _, comp := range []string{"snappy", "zstd"} {
		data := writeCols(t, &table.Schema{Fields: fields}, cols, n, 1234, WriterOptions{Compression: comp, RowGroupRows: 2000})
		got := make([][]cell, len(fields))
		schema := arrowRead(t, data, "", nil, func(rec arrow.Record) {
			for i := range got {
				got[i] = append(got[i], arrowCells(t, rec.Column(i))...)
			}
		})
		for i, f := range schema.Fields() {
			if f.Name != fields[i].Name || f.Nullable != fields[i].Nullable {
				t.Fatalf("%s: Arrow sees column %d as %q (nullable %v), want %q (%v)", comp, i, f.Name, f.Nullable, fields[i].Name, fields[i].Nullable)
			}
		}
		for i := range fields {
			compareCells(t, comp+" "+fields[i].Name, got[i], want[i])
		}
	}
}

// arrowTable builds, with Arrow's builders, the table of 9000 rows that
// arrowFile writes, and returns it with its cells.
func arrowTable(t testing.TB) (arrow.Table, [][]cell) {
	const n = 9000
	mem := memory.DefaultAllocator
	schema := arrow.NewSchema([]arrow.Field{
		{Name: "postcode", Type: arrow.BinaryTypes.String, Nullable: true},
		{Name: "weight_g", Type: arrow.PrimitiveTypes.Int64, Nullable: true},
		{Name: "zone", Type: arrow.PrimitiveTypes.Int32, Nullable: false},
		{Name: "cost", Type: arrow.PrimitiveTypes.Float64, Nullable: true},
		{Name: "late", Type: arrow.FixedWidthTypes.Boolean, Nullable: true},
		{Name: "sender", Type: arrow.BinaryTypes.String, Nullable: false},
	}, nil)
	b := array.NewRecordBuilder(mem, schema)
	defer b.Release()
	want := make([][]cell, 6)
	add := func(c int, null bool, text string) {
		if null {
			want[c] = append(want[c], cell{null: true})
		} else {
			want[c] = append(want[c], cell{text: text})
		}
	}
	for i := 0; i < n; i++ {
		null := i%13 == 5 || (i > 4000 && i < 4100)
		pc := "PC" + strconv.Itoa(i*37%501)
		if null {
			b.Field(0).AppendNull()
		} else {
			b.Field(0).(*array.StringBuilder).Append(pc)
		}
		add(0, null, pc)
		w := int64(i*7919%100000) - 500
		if i%17 == 0 {
			b.Field(1).AppendNull()
		} else {
			b.Field(1).(*array.Int64Builder).Append(w)
		}
		add(1, i%17 == 0, strconv.FormatInt(w, 10))
		b.Field(2).(*array.Int32Builder).Append(int32(i % 9))
		add(2, false, strconv.Itoa(i%9))
		cost := float64(i%1000) / 4
		if i%19 == 0 {
			b.Field(3).AppendNull()
		} else {
			b.Field(3).(*array.Float64Builder).Append(cost)
		}
		add(3, i%19 == 0, string(table.AppendFloat(nil, cost)))
		if i%23 == 0 {
			b.Field(4).AppendNull()
		} else {
			b.Field(4).(*array.BooleanBuilder).Append(i%3 == 0)
		}
		add(4, i%23 == 0, strconv.FormatBool(i%3 == 0))
		s := "acct-" + strconv.Itoa(i) // unique: the dictionary overflows
		b.Field(5).(*array.StringBuilder).Append(s)
		add(5, false, s)
	}
	rec := b.NewRecord()
	defer rec.Release()
	return array.NewTableFromRecords(schema, []arrow.Record{rec}), want
}

// arrowFile writes the table of arrowTable with Arrow's writer: data pages
// of version v, codec c, small pages and dictionaries, row groups of 4000
// rows.
func arrowFile(t testing.TB, v parquet.DataPageVersion, c compress.Compression) ([]byte, [][]cell) {
	tbl, want := arrowTable(t)
	defer tbl.Release()
	props := parquet.NewWriterProperties(
		parquet.WithDictionaryDefault(true),
		parquet.WithDictionaryPageSizeLimit(16<<10),
		parquet.WithDataPageSize(4<<10),
		parquet.WithMaxRowGroupLength(4000),
		parquet.WithDataPageVersion(v),
		parquet.WithCompression(c),
	)
	var buf bytes.Buffer
	if err := pqarrow.WriteTable(tbl, &buf, 4000, props, pqarrow.DefaultWriterProps()); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes(), want
}

// TestReadArrowFiles reads files that Arrow's writer made (data pages v1
// and v2, dictionary and plain, with nulls) and compares with the values
// written.
func TestReadArrowFiles(t *testing.T) {
	for _, v := range []parquet.DataPageVersion{parquet.DataPageV1, parquet.DataPageV2} {
		t.Run(fmt.Sprint("v", v), func(t *testing.T) {
			data, want := arrowFile(t, v, compress.Codecs.Snappy)
			r := openBytes(t, "arrow-written.parquet", data)
			defer r.Close()
			wantFields := []table.Field{
				{Name: "postcode", Kind: table.String, Nullable: true},
				{Name: "weight_g", Kind: table.Int64, Nullable: true},
				{Name: "zone", Kind: table.Int64},
				{Name: "cost", Kind: table.Float64, Nullable: true},
				{Name: "late", Kind: table.Bool, Nullable: true},
				{Name: "sender", Kind: table.String},
			}
			for i, f := range r.Schema().Fields {
				if f != wantFields[i] {
					t.Fatalf("field %d = %+v, want %+v", i, f, wantFields[i])
				}
			}
			res := readAll(t, r)
			for i, f := range wantFields {
				compareCells(t, f.Name, res.cols[i], want[i])
			}
			if res.forms[0][0] != table.FormDict {
				t.Fatalf("postcode came in form %d, want dictionary form", res.forms[0][0])
			}
		})
	}
}

// openDataPath gives the path of an open data file fetched by
// testdata/fetch.sh; a missing file fails the test (skips under -short).
func openDataPath(t testing.TB, name string) string {
	t.Helper()
	p := filepath.Join("..", "..", "testdata", "open", name)
	if _, err := os.Stat(p); err != nil {
		if testing.Short() {
			t.Skipf("%s is missing (run testdata/fetch.sh); skipped under -short", p)
		}
		t.Fatalf("%s is missing: run testdata/fetch.sh to fetch the open data sets (%v)", p, err)
	}
	return p
}

// flightStats are the aggregates compared between the two readers.
type flightStats struct {
	rows        int64
	perOrigin   map[string]int64
	perDest     map[string]int64
	delaySum    int64
	delayNulls  int64
	distanceSum int64
	dateSum     uint64 // the sum of the dates' texts' FNV-1a hashes
}

// TestFlightsAgainstArrow reads the open flights table (3 million rows)
// with pqio and with Arrow's reader: the row count, per-origin and
// per-destination counts, and the sums of delay and distance must agree
// exactly, and the date's ISO 8601 texts (pqio's, and Arrow's timestamps
// formatted by the standard library) too.
func TestFlightsAgainstArrow(t *testing.T) {
	path := openDataPath(t, "flights-3m.parquet")
	r, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	if r.NumRows() != 3_000_000 {
		t.Fatalf("NumRows = %d, want 3,000,000 (datapackage.json of vega-datasets 3.2.1 names the file flights_3m)", r.NumRows())
	}
	wantFields := []table.Field{
		{Name: "date", Kind: table.String, Nullable: true},
		{Name: "delay", Kind: table.Int64, Nullable: true},
		{Name: "distance", Kind: table.Int64, Nullable: true},
		{Name: "origin", Kind: table.String, Nullable: true},
		{Name: "destination", Kind: table.String, Nullable: true},
	}
	for i, f := range r.Schema().Fields {
		if f != wantFields[i] {
			t.Fatalf("field %d = %+v, want %+v", i, f, wantFields[i])
		}
	}
	ours := flightStats{perOrigin: map[string]int64{}, perDest: map[string]int64{}}
	dictCounts := map[uint64][]int64{} // per dictionary ID, counts per entry
	dicts := map[uint64]*table.Dict{}
	for {
		b, err := r.Next()
		if err != nil {
			break
		}
		ours.rows += int64(b.Rows)
		date, delay, dist, origin, dest := &b.Cols[0], &b.Cols[1], &b.Cols[2], &b.Cols[3], &b.Cols[4]
		for i := 0; i < b.Rows; i++ {
			if delay.IsNull(i) {
				ours.delayNulls++
			} else {
				ours.delaySum += delay.Ints[i]
			}
			if !dist.IsNull(i) {
				ours.distanceSum += dist.Ints[i]
			}
			if !date.IsNull(i) {
				ours.dateSum += textHash(string(date.Bytes(i)))
			}
			if !dest.IsNull(i) {
				ours.perDest[string(dest.Bytes(i))]++
			}
		}
		// Count origins by dictionary index, mapping each entry once.
		if origin.Form != table.FormDict {
			t.Fatalf("origin in form %d, want dictionary form", origin.Form)
		}
		counts := dictCounts[origin.Dict.ID]
		if counts == nil {
			counts = make([]int64, origin.Dict.Len())
			dictCounts[origin.Dict.ID] = counts
			dicts[origin.Dict.ID] = origin.Dict
		}
		for i, x := range origin.Indices {
			if !origin.IsNull(i) {
				counts[x]++
			}
		}
	}
	if _, err := r.Next(); err == nil {
		t.Fatal("Next after the end succeeded")
	}
	for id, counts := range dictCounts {
		for e, n := range counts {
			if n > 0 {
				ours.perOrigin[string(dicts[id].Entry(e))] += n
			}
		}
	}

	theirs := flightStats{perOrigin: map[string]int64{}, perDest: map[string]int64{}}
	arrowRead(t, nil, path, nil, func(rec arrow.Record) {
		theirs.rows += rec.NumRows()
		date := rec.Column(0).(*array.Timestamp)
		dt := date.DataType().(*arrow.TimestampType)
		toTime, err := dt.GetToTimeFunc()
		if err != nil {
			t.Fatal(err)
		}
		layout := time.RFC3339Nano // adjusted to UTC: a Z
		if dt.TimeZone == "" {
			layout = "2006-01-02T15:04:05.999999999" // a wall clock time (this file's): no zone
		}
		delay := rec.Column(1).(*array.Int64)
		dist := rec.Column(2).(*array.Int64)
		// The file's Arrow schema gives large strings; take either kind.
		origin := rec.Column(3).(stringArray)
		dest := rec.Column(4).(stringArray)
		for i := 0; i < int(rec.NumRows()); i++ {
			if delay.IsNull(i) {
				theirs.delayNulls++
			} else {
				theirs.delaySum += delay.Value(i)
			}
			if !dist.IsNull(i) {
				theirs.distanceSum += dist.Value(i)
			}
			if !date.IsNull(i) {
				theirs.dateSum += textHash(toTime(date.Value(i)).UTC().Format(layout))
			}
			if !origin.IsNull(i) {
				theirs.perOrigin[origin.Value(i)]++
			}
			if !dest.IsNull(i) {
				theirs.perDest[dest.Value(i)]++
			}
		}
	})
	if ours.rows != 3_000_000 || theirs.rows != 3_000_000 {
		t.Fatalf("rows: pqio %d, Arrow %d, want 3,000,000", ours.rows, theirs.rows)
	}
	if ours.delaySum != theirs.delaySum || ours.delayNulls != theirs.delayNulls {
		t.Fatalf("delay: pqio sum %d (%d nulls), Arrow sum %d (%d nulls)", ours.delaySum, ours.delayNulls, theirs.delaySum, theirs.delayNulls)
	}
	if ours.distanceSum != theirs.distanceSum || ours.dateSum != theirs.dateSum {
		t.Fatalf("distance sum %d vs %d, date sum %d vs %d", ours.distanceSum, theirs.distanceSum, ours.dateSum, theirs.dateSum)
	}
	compareCounts(t, "origin", ours.perOrigin, theirs.perOrigin)
	compareCounts(t, "destination", ours.perDest, theirs.perDest)
	t.Logf("3,000,000 rows, %d origins, delay sum %d, %d null delays", len(ours.perOrigin), ours.delaySum, ours.delayNulls)
}

// textHash is the FNV-1a hash of s.
func textHash(s string) uint64 {
	h := fnv.New64a()
	h.Write([]byte(s))
	return h.Sum64()
}

// stringArray is what Arrow's String and LargeString arrays share.
type stringArray interface {
	IsNull(int) bool
	Value(int) string
}

func compareCounts(t *testing.T, what string, ours, theirs map[string]int64) {
	t.Helper()
	if len(ours) != len(theirs) {
		t.Fatalf("%s: pqio sees %d levels, Arrow %d", what, len(ours), len(theirs))
	}
	for k, n := range theirs {
		if ours[k] != n {
			t.Fatalf("%s %q: pqio counts %d, Arrow %d", what, k, ours[k], n)
		}
	}
}

// TestFlightsSelect reads only the origin column of the flights table.
func TestFlightsSelect(t *testing.T) {
	path := openDataPath(t, "flights-3m.parquet")
	r, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	if err := r.Select([]int{r.Schema().Index("origin")}); err != nil {
		t.Fatal(err)
	}
	var rows int64
	for {
		b, err := r.Next()
		if err != nil {
			break
		}
		if len(b.Cols) != 1 || b.Cols[0].Form != table.FormDict {
			t.Fatalf("batch has %d columns, form %d", len(b.Cols), b.Cols[0].Form)
		}
		rows += int64(b.Rows)
	}
	if rows != 3_000_000 {
		t.Fatalf("%d rows, want 3,000,000", rows)
	}
}
