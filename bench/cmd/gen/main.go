// Command gen writes the benchmark shipments table of manyfold's
// performance harness: the parcels generator's table at any row count,
// deterministic from a seed, as Parquet (snappy, dictionary-encoded text,
// row groups of 1<<20 rows) and as CSV, plus a side file folds.parquet with
// one int column "fold" in file row order holding manyfold's row fold
// (folds.Row(foldSeed, row, k)) for the SQL peer, which joins it by
// position.
//
// With --parts N it also writes the same rows as N Parquet files, a
// dataset in DATA/shipments.parts.
//
//	gen --rows 1000000 --dir DATA [--seed 11] [--no-shipment-id] [--formats parquet,csv] [--parts N]
package main

import (
	"flag"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"time"

	"manyfold/folds"
	"manyfold/internal/parcels"
	"manyfold/io/pqio"
	"manyfold/io/table"
	"manyfold/io/tableio"
)

func main() {
	rows := flag.Int64("rows", 1_000_000, "shipments to generate")
	seed := flag.Uint64("seed", 11, "seed of the parcels network and rows")
	dir := flag.String("dir", ".", "output directory")
	formats := flag.String("formats", "parquet,csv", "formats to write: parquet, csv")
	noID := flag.Bool("no-shipment-id", false, "leave out the shipment_id column")
	foldSeed := flag.Uint64("fold-seed", 3, "manyfold --seed of the fold assignment")
	k := flag.Int("folds", 5, "manyfold --folds")
	noFolds := flag.Bool("no-folds-file", false, "do not write folds.parquet")
	repeat := flag.Int64("repeat", 1, "write the first rows/repeat rows this many times (the same levels, more rows)")
	parts := flag.Int("parts", 0, "also write the Parquet table as this many files, shipments.parts/part-NNNNN.parquet (a dataset)")
	flag.Parse()
	if *repeat < 1 || *rows%*repeat != 0 {
		fmt.Fprintf(os.Stderr, "gen: --repeat %d must be at least 1 and divide --rows %d\n", *repeat, *rows)
		os.Exit(2)
	}
	if err := run(*rows, *seed, *dir, *formats, *noID, *foldSeed, *k, !*noFolds, *repeat, *parts); err != nil {
		fmt.Fprintln(os.Stderr, "gen:", err)
		os.Exit(1)
	}
}

func run(rows int64, seed uint64, dir, formats string, noID bool, foldSeed uint64, k int, writeFolds bool, repeat int64, parts int) error {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return err
	}
	for _, f := range strings.Split(formats, ",") {
		var ext string
		switch f {
		case "parquet":
			ext = ".parquet"
		case "csv":
			ext = ".csv"
		default:
			return fmt.Errorf("unknown format %q", f)
		}
		path := filepath.Join(dir, "shipments"+ext)
		start := time.Now()
		if err := writeTable(path, rows, seed, noID, repeat); err != nil {
			return err
		}
		fmt.Fprintf(os.Stderr, "gen: %s (%d rows) in %.1fs\n", path, rows, time.Since(start).Seconds())
	}
	if parts > 0 {
		start := time.Now()
		if err := writeParts(filepath.Join(dir, "shipments.parts"), parts, rows, seed, noID); err != nil {
			return err
		}
		fmt.Fprintf(os.Stderr, "gen: %d parts (%d rows) in %.1fs\n", parts, rows, time.Since(start).Seconds())
	}
	if writeFolds {
		path := filepath.Join(dir, "folds.parquet")
		if err := writeFoldsFile(path, rows, foldSeed, k); err != nil {
			return err
		}
	}
	return nil
}

// config is the benchmark table: 40,000 postcodes (Zipf, 1% nulls),
// 1,000,000 sender accounts, nearly unique shipment ids.
func config(rows int64, seed uint64) parcels.Config {
	return parcels.Config{Rows: rows, Seed: seed, Accounts: 1_000_000}
}

// writeTable writes the table of rows/repeat rows repeat times over.
func writeTable(path string, rows int64, seed uint64, noID bool, repeat int64) error {
	schema := parcels.Schema()
	if noID {
		schema = &table.Schema{Fields: schema.Fields[1:]}
	}
	out, err := tableio.Create(path, schema, tableio.WriteOptions{Parquet: pqio.WriterOptions{RowGroupRows: 1 << 20}})
	if err != nil {
		return err
	}
	var w table.Writer = out
	if noID {
		w = &dropFirst{w: out}
	}
	for range repeat {
		if err := parcels.Generate(config(rows/repeat, seed), w); err != nil {
			out.Abort()
			return err
		}
	}
	return out.Commit()
}

// writeParts writes the table as n Parquet files in dir, each of about
// rows/n rows (cut at the generator's batches), in row order.
func writeParts(dir string, n int, rows int64, seed uint64, noID bool) error {
	if err := os.RemoveAll(dir); err != nil {
		return err
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return err
	}
	schema := parcels.Schema()
	if noID {
		schema = &table.Schema{Fields: schema.Fields[1:]}
	}
	p := &partWriter{dir: dir, schema: schema, n: n, quota: rows / int64(n)}
	var w table.Writer = p
	if noID {
		w = &dropFirst{w: p}
	}
	if err := parcels.Generate(config(rows, seed), w); err != nil {
		if p.out != nil {
			p.out.Abort()
		}
		return err
	}
	return w.Close()
}

// partWriter writes batches into part files, the next part once a part
// holds its quota of rows (the last takes the rest).
type partWriter struct {
	dir    string
	schema *table.Schema
	n      int
	quota  int64
	part   int
	rows   int64 // in the open part
	out    *tableio.Output
}

func (p *partWriter) Write(b *table.Batch) error {
	if p.out != nil && p.rows >= p.quota && p.part < p.n {
		if err := p.out.Commit(); err != nil {
			return err
		}
		p.out = nil
	}
	if p.out == nil {
		var err error
		path := filepath.Join(p.dir, fmt.Sprintf("part-%05d.parquet", p.part))
		if p.out, err = tableio.Create(path, p.schema, tableio.WriteOptions{Parquet: pqio.WriterOptions{RowGroupRows: 1 << 20}}); err != nil {
			return err
		}
		p.part++
		p.rows = 0
	}
	p.rows += int64(b.Rows)
	return p.out.Write(b)
}

func (p *partWriter) Close() error {
	if p.out == nil {
		return nil
	}
	return p.out.Commit()
}

// dropFirst passes batches on without their first column.
type dropFirst struct {
	w table.Writer
	b table.Batch
}

func (d *dropFirst) Write(b *table.Batch) error {
	d.b = *b
	d.b.Cols = b.Cols[1:]
	return d.w.Write(&d.b)
}

func (d *dropFirst) Close() error { return d.w.Close() }

// writeFoldsFile writes the fold of every row, in row order.
func writeFoldsFile(path string, rows int64, foldSeed uint64, k int) error {
	schema := &table.Schema{Fields: []table.Field{{Name: "fold", Kind: table.Int64}}}
	out, err := tableio.Create(path, schema, tableio.WriteOptions{Parquet: pqio.WriterOptions{RowGroupRows: 1 << 20}})
	if err != nil {
		return err
	}
	const batch = 1 << 16
	b := table.Batch{Cols: []table.Column{{Form: table.FormInt64, Ints: make([]int64, batch)}}}
	for first := int64(0); first < rows; first += batch {
		n := int(min(batch, rows-first))
		ints := b.Cols[0].Ints[:n]
		for i := range ints {
			ints[i] = int64(folds.Row(foldSeed, uint64(first)+uint64(i), k))
		}
		b.Rows, b.FirstRow, b.Cols[0].Ints = n, first+1, ints
		if err := out.Write(&b); err != nil {
			out.Abort()
			return err
		}
		b.Cols[0].Ints = ints[:cap(ints)]
	}
	return out.Commit()
}
