package csvio

import (
	"bytes"
	"io"
	"math/rand/v2"
	"strconv"
	"sync"
	"testing"

	"manyfold/io/table"
)

var (
	benchOnce sync.Once
	benchData []byte
)

// shipmentsCSV returns about size bytes of CSV shaped like a shipments
// table: 8 columns, the route and the parcel note quoted (they hold commas
// or quotes), one in ten notes null.
func shipmentsCSV(size int) []byte {
	rng := rand.New(rand.NewPCG(1, 2))
	types := []string{"letter", "small", "medium", "large", "pallet"}
	depots := []string{"North", "South", "Harbour", "Airport", "Ridge"}
	b := make([]byte, 0, size+256)
	b = append(b, "shipment_id,sender_account,postcode,route,parcel_type,weight_kg,late,note\n"...)
	for id := 1; len(b) < size; id++ {
		b = strconv.AppendInt(b, int64(id), 10)
		b = append(b, ",SA-"...)
		b = strconv.AppendInt(b, int64(100000+rng.IntN(900000)), 10)
		b = append(b, ',')
		pc := rng.IntN(100000)
		for d := 10000; d > 0; d /= 10 {
			b = append(b, byte('0'+pc/d%10))
		}
		b = append(b, ",\"R"...)
		b = strconv.AppendInt(b, int64(rng.IntN(400)), 10)
		b = append(b, ", "...)
		b = append(b, depots[rng.IntN(len(depots))]...)
		b = append(b, " depot\","...)
		b = append(b, types[rng.IntN(len(types))]...)
		b = append(b, ',')
		b = strconv.AppendFloat(b, float64(rng.IntN(300000))/1000, 'f', -1, 64)
		b = append(b, ',')
		b = strconv.AppendBool(b, rng.IntN(7) == 0)
		b = append(b, ',')
		switch rng.IntN(10) {
		case 0:
		case 1:
			b = append(b, `"leave with ""neighbour"""`...)
		default:
			b = append(b, "ring bell"...)
		}
		b = append(b, '\n')
	}
	return b
}

func BenchmarkSplit(b *testing.B) {
	benchOnce.Do(func() { benchData = shipmentsCSV(50 << 20) })
	b.SetBytes(int64(len(benchData)))
	b.ReportAllocs()
	for b.Loop() {
		r, err := NewReader(bytes.NewReader(benchData), "bench.csv", Options{})
		if err != nil {
			b.Fatal(err)
		}
		for {
			_, err := r.Next()
			if err == io.EOF {
				break
			}
			if err != nil {
				b.Fatal(err)
			}
		}
		r.Close()
	}
}

func BenchmarkWrite(b *testing.B) {
	const rows = 65536
	rng := rand.New(rand.NewPCG(3, 4))
	schema := &table.Schema{Fields: []table.Field{
		{Name: "shipment_id", Kind: table.Int64}, {Name: "postcode"}, {Name: "route"},
		{Name: "weight_kg", Kind: table.Float64}, {Name: "late", Kind: table.Bool}, {Name: "parcel_type"},
	}}
	ids := make([]int64, rows)
	weights := make([]float64, rows)
	late := make([]bool, rows)
	var pcData, routeData []byte
	pcOffs, routeOffs := []int32{0}, []int32{0}
	idx := make([]int32, rows)
	for i := range ids {
		ids[i] = int64(i + 1)
		weights[i] = float64(rng.IntN(300000)) / 1000
		late[i] = rng.IntN(7) == 0
		pcData = append(pcData, strconv.Itoa(10000+rng.IntN(90000))...)
		pcOffs = append(pcOffs, int32(len(pcData)))
		routeData = append(routeData, "R"+strconv.Itoa(rng.IntN(400))+", Harbour depot"...)
		routeOffs = append(routeOffs, int32(len(routeData)))
		idx[i] = int32(rng.IntN(3))
	}
	dict := &table.Dict{Data: []byte("smallmediumlarge"), Offsets: []int32{0, 5, 11, 16}, ID: 1}
	batch := &table.Batch{Rows: rows, Cols: []table.Column{
		{Form: table.FormInt64, Ints: ids},
		{Form: table.FormText, Data: pcData, Offsets: pcOffs},
		{Form: table.FormText, Data: routeData, Offsets: routeOffs},
		{Form: table.FormFloat64, Floats: weights},
		{Form: table.FormBool, Bools: late},
		{Form: table.FormDict, Dict: dict, Indices: idx},
	}}
	var cnt countWriter
	w, _ := NewWriter(&cnt, schema, WriterOptions{})
	w.Write(batch)
	w.Close()
	b.SetBytes(cnt.n)
	b.ReportAllocs()
	w, _ = NewWriter(io.Discard, schema, WriterOptions{})
	for b.Loop() {
		if err := w.Write(batch); err != nil {
			b.Fatal(err)
		}
	}
	w.Close()
}

type countWriter struct{ n int64 }

func (c *countWriter) Write(p []byte) (int, error) { c.n += int64(len(p)); return len(p), nil }

// BenchmarkWriteFloats writes one float column of 65,536 rows: "encoded"
// holds values as an encoded column has them (a Zipf-skewed choice among
// 40,000 levels' means in 5 folds, and for a third of the rows one of 5
// fold priors, as a unique level gets), "distinct" a new value on every
// row, where remembering texts cannot help.
func BenchmarkWriteFloats(b *testing.B) {
	const rows = 65536
	rng := rand.New(rand.NewPCG(5, 6))
	zipf := rand.NewZipf(rng, 1.1, 1, 40000*5-1)
	for _, tc := range []struct {
		name string
		val  func(i int) float64
	}{
		{"encoded", func(i int) float64 {
			if i%3 == 0 {
				return 0.1 + float64(i%5)/1000
			}
			return 1 / (1 + float64(zipf.Uint64())*0.37)
		}},
		{"distinct", func(i int) float64 { return rng.Float64() }},
	} {
		b.Run(tc.name, func(b *testing.B) {
			vals := make([]float64, rows)
			for i := range vals {
				vals[i] = tc.val(i)
			}
			schema := &table.Schema{Fields: []table.Field{{Name: "tmean", Kind: table.Float64}}}
			batch := &table.Batch{Rows: rows, Cols: []table.Column{{Form: table.FormFloat64, Floats: vals}}}
			b.ReportAllocs()
			w, _ := NewWriter(io.Discard, schema, WriterOptions{})
			for b.Loop() {
				if err := w.Write(batch); err != nil {
					b.Fatal(err)
				}
			}
			w.Close()
			b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N*rows), "ns/value")
		})
	}
}
