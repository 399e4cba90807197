package pipeline

import (
	"path/filepath"
	"testing"

	"manyfold/internal/parcels"
	"manyfold/io/table"
	"manyfold/io/tableio"
)

// discard is a table.Writer that keeps nothing.
type discard struct{}

func (discard) Write(*table.Batch) error { return nil }
func (discard) Close() error             { return nil }

// benchTable writes a generated shipments table of n rows as Parquet.
func benchTable(b *testing.B, n int64) string {
	b.Helper()
	path := filepath.Join(b.TempDir(), "shipments.parquet")
	w, err := tableio.Create(path, parcels.Schema(), tableio.WriteOptions{})
	if err != nil {
		b.Fatal(err)
	}
	if err := parcels.Generate(parcels.Config{Rows: n, Seed: 5}, w); err != nil {
		b.Fatal(err)
	}
	if err := w.Commit(); err != nil {
		b.Fatal(err)
	}
	return path
}

// BenchmarkFitEncode times both passes of the main job over a Parquet table
// (dictionary-encoded text columns), writing to nowhere: the cost of
// statistics and encoding without the output format's.
func BenchmarkFitEncode(b *testing.B) { benchFitEncode(b, "late") }

// BenchmarkFitEncodeCost is BenchmarkFitEncode with the regression target
// cost, whose per-level sums are exact (encoders/exactsum).
func BenchmarkFitEncodeCost(b *testing.B) { benchFitEncode(b, "cost") }

func benchFitEncode(b *testing.B, target string) {
	const rows = 200000
	path := benchTable(b, rows)
	sp := DefaultSpec()
	sp.Target, sp.Columns = target, []string{"dest_postcode", "sender_account", "route"}
	sp.Encodings = mustPlan(b, "target:eb+freq")
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		r, err := tableio.Open(path, tableio.ReadOptions{})
		if err != nil {
			b.Fatal(err)
		}
		m, err := Fit(r, sp, FitOptions{File: path, Threads: 1})
		r.Close()
		if err != nil {
			b.Fatal(err)
		}
		r, err = tableio.Open(path, tableio.ReadOptions{})
		if err != nil {
			b.Fatal(err)
		}
		if _, err := m.Encode(r, discard{}, EncodeOptions{File: path, Threads: 1}); err != nil {
			b.Fatal(err)
		}
		r.Close()
	}
	b.ReportMetric(float64(rows*b.N)/b.Elapsed().Seconds()/1e6, "Mrows/s")
}

// BenchmarkTables times writing the mapping tables of a fit over 1M rows
// with a unique id column (1M levels) beside the postcodes and accounts:
// the levels are written in canonical order, which is not their order in
// memory.
func BenchmarkTables(b *testing.B) {
	const rows = 1000000
	path := benchTable(b, rows)
	sp := DefaultSpec()
	sp.Target, sp.Columns = "late", []string{"dest_postcode", "sender_account", "shipment_id"}
	sp.Encodings = mustPlan(b, "target:eb+freq")
	r, err := tableio.Open(path, tableio.ReadOptions{})
	if err != nil {
		b.Fatal(err)
	}
	m, err := Fit(r, sp, FitOptions{File: path, Threads: 2})
	r.Close()
	if err != nil {
		b.Fatal(err)
	}
	dir := b.TempDir()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		st, err := m.StageTables(filepath.Join(dir, "tables"))
		if err != nil {
			b.Fatal(err)
		}
		st.Abort()
	}
	b.ReportMetric(float64(rows*b.N)/b.Elapsed().Seconds()/1e6, "Mlevels/s")
}
