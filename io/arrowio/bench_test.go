package arrowio

import (
	"fmt"
	"io"
	"os"
	"path/filepath"
	"testing"

	"github.com/apache/arrow/go/v17/arrow"
	"github.com/apache/arrow/go/v17/arrow/array"
	"github.com/apache/arrow/go/v17/arrow/ipc"
	"github.com/apache/arrow/go/v17/arrow/memory"

	"manyfold/io/table"
)

const benchRows, benchBatch = 1 << 20, 1 << 16

// benchFile writes 1M shipment rows (dictionary route, text postcode, int,
// float) in batches of 64K rows with Arrow's writer.
func benchFile(b *testing.B) (string, int64) {
	b.Helper()
	schema := arrow.NewSchema([]arrow.Field{
		{Name: "route", Type: &arrow.DictionaryType{IndexType: arrow.PrimitiveTypes.Int32, ValueType: arrow.BinaryTypes.String}, Nullable: true},
		{Name: "postcode", Type: arrow.BinaryTypes.String, Nullable: true},
		{Name: "parcels", Type: arrow.PrimitiveTypes.Int64, Nullable: true},
		{Name: "cost", Type: arrow.PrimitiveTypes.Float64, Nullable: true},
	}, nil)
	mem := memory.NewGoAllocator()
	path := filepath.Join(b.TempDir(), "bench.arrow")
	f, err := os.Create(path)
	if err != nil {
		b.Fatal(err)
	}
	w, err := ipc.NewFileWriter(f, ipc.WithSchema(schema))
	if err != nil {
		b.Fatal(err)
	}
	sb := array.NewStringBuilder(mem)
	for i := 0; i < 500; i++ {
		sb.Append(fmt.Sprintf("R-%03d", i))
	}
	dict := sb.NewArray()
	for start := 0; start < benchRows; start += benchBatch {
		ib := array.NewInt32Builder(mem)
		pb := array.NewStringBuilder(mem)
		nb := array.NewInt64Builder(mem)
		cb := array.NewFloat64Builder(mem)
		for i := start; i < start+benchBatch; i++ {
			ib.Append(int32(i * 7 % 500))
			pb.Append(fmt.Sprintf("PC-%05d", i*13%90000))
			if i%10 == 0 {
				nb.AppendNull()
			} else {
				nb.Append(int64(i % 9))
			}
			cb.Append(float64(i%1000) / 8)
		}
		idx := ib.NewArray()
		cols := []arrow.Array{array.NewDictionaryArray(schema.Field(0).Type, idx, dict), pb.NewArray(), nb.NewArray(), cb.NewArray()}
		rec := array.NewRecord(schema, cols, benchBatch)
		if err := w.Write(rec); err != nil {
			b.Fatal(err)
		}
		rec.Release()
	}
	if err := w.Close(); err != nil {
		b.Fatal(err)
	}
	st, _ := f.Stat()
	f.Close()
	return path, st.Size()
}

func BenchmarkRead(b *testing.B) {
	path, size := benchFile(b)
	b.SetBytes(size)
	b.ResetTimer()
	for range b.N {
		r, err := Open(path)
		if err != nil {
			b.Fatal(err)
		}
		rows := 0
		for {
			batch, err := r.Next()
			if err == io.EOF {
				break
			}
			if err != nil {
				b.Fatal(err)
			}
			rows += batch.Rows
		}
		r.Close()
		if rows != benchRows {
			b.Fatalf("%d rows", rows)
		}
	}
	b.ReportMetric(float64(benchRows)*float64(b.N)/b.Elapsed().Seconds()/1e6, "Mrows/s")
}

func BenchmarkWrite(b *testing.B) {
	schema := &table.Schema{Fields: []table.Field{
		{Name: "postcode", Kind: table.String, Nullable: true},
		{Name: "parcels", Kind: table.Int64, Nullable: true},
		{Name: "parcels_text", Kind: table.Int64, Nullable: true},
		{Name: "cost", Kind: table.Float64, Nullable: true},
	}}
	post := table.Column{Form: table.FormText, Offsets: []int32{0}}
	txt := table.Column{Form: table.FormText, Offsets: []int32{0}}
	ints := table.Column{Form: table.FormInt64, Ints: make([]int64, benchBatch)}
	floats := table.Column{Form: table.FormFloat64, Floats: make([]float64, benchBatch)}
	for i := 0; i < benchBatch; i++ {
		post.Data = fmt.Appendf(post.Data, "PC-%05d", i*13%90000)
		post.Offsets = append(post.Offsets, int32(len(post.Data)))
		txt.Data = fmt.Appendf(txt.Data, "%d", i*31)
		txt.Offsets = append(txt.Offsets, int32(len(txt.Data)))
		ints.Ints[i] = int64(i)
		floats.Floats[i] = float64(i) / 8
	}
	batch := &table.Batch{Rows: benchBatch, Cols: []table.Column{post, ints, txt, floats}}
	b.ReportAllocs()
	b.ResetTimer()
	for range b.N {
		w, err := NewWriter(io.Discard, schema)
		if err != nil {
			b.Fatal(err)
		}
		for start := 0; start < benchRows; start += benchBatch {
			if err := w.Write(batch); err != nil {
				b.Fatal(err)
			}
		}
		if err := w.Close(); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(benchRows)*float64(b.N)/b.Elapsed().Seconds()/1e6, "Mrows/s")
}
