package main

import (
	"fmt"
	"os"
	"path/filepath"
	"strconv"
	"strings"

	"manyfold/internal/parcels"
	"manyfold/io/table"
	"manyfold/io/tableio"
)

const demoUsage = `Usage: manyfold demo [--rows N] [--dir DIR]

Runs the whole job on generated data of an invented parcel network: writes a
training table of shipments (destination postcode, sender account, route,
parcel type; targets late and cost) and a second table of new shipments with
unseen postcodes and accounts, profiles the training table, encodes it out of
fold with mapping tables, and applies the tables to the new shipments. Each
step is printed as the manyfold command it runs.
`

func runDemo(args []string) error {
	fs := newFlags("demo", demoUsage)
	rows := fs.Int64("rows", 200000, "training rows to generate (the new table has a quarter as many)")
	dir := fs.String("dir", "manyfold-demo", "directory for the demo's files")
	seed := fs.Uint64("seed", 7, "seed of the generated network")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if *rows < 10 {
		return usagef("--rows %d: need at least 10", *rows)
	}
	if err := os.MkdirAll(*dir, 0o755); err != nil {
		return &outputError{err}
	}
	train := filepath.Join(*dir, "shipments.parquet")
	fresh := filepath.Join(*dir, "new_shipments.csv")
	fmt.Printf("generating %d shipments of an invented parcel network -> %s\n", *rows, train)
	if err := generate(train, parcels.Config{Rows: *rows, Seed: *seed}); err != nil {
		return err
	}
	fmt.Printf("generating %d new shipments, about 20%% to postcodes and accounts never seen -> %s\n\n", *rows/4, fresh)
	if err := generate(fresh, parcels.Config{Rows: *rows / 4, Seed: *seed, Stream: 1, UnseenShare: 0.2}); err != nil {
		return err
	}
	encoded := filepath.Join(*dir, "shipments_encoded.parquet")
	tables := filepath.Join(*dir, "tables")
	applied := filepath.Join(*dir, "new_shipments_encoded.csv")
	steps := [][]string{
		{"scan", train, "--columns", "dest_postcode,sender_account,route,parcel_type,weight_kg", "--top", "3", "--target", "late"},
		{"encode", train, "--target", "late", "--columns", "dest_postcode,sender_account,route",
			"--methods", "target:eb+freq+topk:100+hash:65536", "--folds", "5", "--seed", "1", "--fold-column", "fold",
			"--out", encoded, "--tables", tables},
		{"apply", fresh, "--tables", tables, "--out", applied},
	}
	for _, s := range steps {
		fmt.Printf("$ manyfold %s\n", strings.Join(s, " "))
		if code := run(s); code != exitOK {
			return fmt.Errorf("step %q failed (exit %d)", s[0], code)
		}
		fmt.Println()
	}
	fmt.Println("first rows of", applied+":")
	if err := head(applied, 4); err != nil {
		return err
	}
	fmt.Printf("\nfiles: %s (training table), %s (encoded, with its fold column),\n       %s (mapping tables and manifest.json), %s (new shipments, encoded)\n", train, encoded, tables, applied)
	return nil
}

// generate writes a generated shipments table to path.
func generate(path string, cfg parcels.Config) error {
	w, err := tableio.Create(path, parcels.Schema(), tableio.WriteOptions{})
	if err != nil {
		return &outputError{err}
	}
	if err := parcels.Generate(cfg, w); err != nil {
		w.Abort()
		return err
	}
	if err := w.Commit(); err != nil {
		return &outputError{err}
	}
	return nil
}

// head prints the first n rows of a table as aligned text.
func head(path string, n int) error {
	r, err := tableio.Open(path, tableio.ReadOptions{})
	if err != nil {
		return err
	}
	defer r.Close()
	b, err := r.Next()
	if err != nil {
		return err
	}
	s := r.Schema()
	cells := [][]string{s.Names()}
	var buf []byte
	for i := 0; i < n && i < b.Rows; i++ {
		row := make([]string, len(s.Fields))
		for j := range s.Fields {
			buf = b.Cols[j].AppendText(buf[:0], i)
			row[j] = cell(b.Cols[j], i, buf)
		}
		cells = append(cells, row)
	}
	widths := make([]int, len(s.Fields))
	for _, row := range cells {
		for j, c := range row {
			widths[j] = max(widths[j], len(c))
		}
	}
	for _, row := range cells {
		var line strings.Builder
		for j, c := range row {
			line.WriteString(c)
			line.WriteString(strings.Repeat(" ", widths[j]-len(c)+2))
		}
		fmt.Println(strings.TrimRight(line.String(), " "))
	}
	return nil
}

// cell formats a value for display, rounding long floats to 4 decimals.
func cell(c table.Column, i int, text []byte) string {
	if c.IsNull(i) {
		return "null"
	}
	if v, err := strconv.ParseFloat(string(text), 64); err == nil && strings.Contains(string(text), ".") && len(text) > 8 {
		return strconv.FormatFloat(v, 'f', 4, 64)
	}
	return string(text)
}
