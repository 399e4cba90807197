package dataset_test

import (
	"fmt"
	"log"
	"os"
	"path/filepath"

	"manyfold/io/dataset"
	"manyfold/io/table"
	"manyfold/io/tableio"
)

// writeParquet writes a Parquet file of parcels (id, weight) at path.
func writeParquet(path string, ids []string, weights []int64) error {
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		return err
	}
	schema := &table.Schema{Fields: []table.Field{{Name: "id", Kind: table.String}, {Name: "weight", Kind: table.Int64}}}
	id := table.Column{Form: table.FormText, Offsets: []int32{0}}
	for _, s := range ids {
		id.Data = append(id.Data, s...)
		id.Offsets = append(id.Offsets, int32(len(id.Data)))
	}
	out, err := tableio.Create(path, schema, tableio.WriteOptions{})
	if err != nil {
		return err
	}
	err = out.Write(&table.Batch{Rows: len(ids), Cols: []table.Column{id, {Form: table.FormInt64, Ints: weights}}})
	if err != nil {
		out.Abort()
		return err
	}
	return out.Commit()
}

// A table written by a distributed engine as Parquet parts in hive-style
// folders, with the engine's marker files beside them, reads as one table:
// the parts' rows in the order of their paths, numbered across the parts,
// and the folders' keys as text columns (the null partition as nulls).
func Example() {
	root, err := os.MkdirTemp("", "parcels")
	if err != nil {
		log.Fatal(err)
	}
	defer os.RemoveAll(root)
	for _, p := range []struct {
		path    string
		ids     []string
		weights []int64
	}{
		{"depot=north/day=2/part-00000.parquet", []string{"p4"}, []int64{12}},
		{"depot=north/day=1/part-00000.parquet", []string{"p1", "p2"}, []int64{3, 7}},
		{"depot=north/day=1/part-00001.parquet", []string{"p3"}, []int64{5}},
		{"depot=__HIVE_DEFAULT_PARTITION__/day=1/part-00000.parquet", []string{"p5"}, []int64{1}},
	} {
		if err := writeParquet(filepath.Join(root, p.path), p.ids, p.weights); err != nil {
			log.Fatal(err)
		}
	}
	// The engine's marker and a checksum: skipped.
	for _, name := range []string{"_SUCCESS", "depot=north/day=1/.part-00000.parquet.crc"} {
		if err := os.WriteFile(filepath.Join(root, name), nil, 0o644); err != nil {
			log.Fatal(err)
		}
	}

	files, err := dataset.List(root)
	if err != nil {
		log.Fatal(err)
	}
	for _, f := range files {
		rel, _ := filepath.Rel(root, f.Path)
		fmt.Println(filepath.ToSlash(rel))
	}
	// tableio.Open(root, ...) does the same: it opens each file with
	// tableio.Open.
	r, err := dataset.New(files, func(path string) (table.Reader, error) {
		return tableio.Open(path, tableio.ReadOptions{})
	})
	if err != nil {
		log.Fatal(err)
	}
	defer r.Close()
	fmt.Println(r.NumRows(), "rows:", r.Schema().Names())
	err = table.ForEach(r, func(b *table.Batch) error {
		for i := range b.Rows {
			fmt.Printf("row %d:", b.FirstRow+int64(i))
			for c := range b.Cols {
				if b.Cols[c].IsNull(i) {
					fmt.Print(" NULL")
				} else {
					fmt.Printf(" %s", b.Cols[c].AppendText(nil, i))
				}
			}
			fmt.Println()
		}
		return nil
	})
	if err != nil {
		log.Fatal(err)
	}
	// Output:
	// depot=__HIVE_DEFAULT_PARTITION__/day=1/part-00000.parquet
	// depot=north/day=1/part-00000.parquet
	// depot=north/day=1/part-00001.parquet
	// depot=north/day=2/part-00000.parquet
	// 5 rows: [id weight depot day]
	// row 1: p5 1 NULL 1
	// row 2: p1 3 north 1
	// row 3: p2 7 north 1
	// row 4: p3 5 north 1
	// row 5: p4 12 north 2
}
