package main

import (
	"errors"
	"fmt"

	"manyfold/encoders/pipeline"
	"manyfold/io/dataset"
	"manyfold/io/derive"
	"manyfold/io/pqio"
	"manyfold/io/table"
	"manyfold/io/tableio"
)

// output is the pass that writes the encoded table: its reader, the
// writer, and what Encode needs to know of the columns the writer copies.
type output struct {
	r    table.Reader
	w    *tableio.Output
	full *table.Schema // the input's schema before any Select
	src  *pqio.Source  // nil when nothing is copied
}

// openOutput opens the input at path for the writing pass and creates the
// output. When both are Parquet, the kept input columns are copied into the
// output chunk by chunk as they are, still encoded and compressed (see
// pqio.Source), and the reader is restricted to the columns the encodings
// need; a kept flat column that cannot be copied (its pages do not check
// out) is read and written again as before. Nested input columns (lists,
// maps, structs) are copied whole: those that keep names (the --keep list
// as given; nil: every column is kept), and only into a Parquet output.
// check, when not nil, vets the input's schema first. The caller calls
// close and commits or aborts w.
func openOutput(path, name, out string, ropts tableio.ReadOptions, wopts tableio.WriteOptions, m *pipeline.Model, use pipeline.Use, keep []string, check func(*table.Schema) error) (*output, error) {
	r, err := openTable(path, ropts, specNames(&m.Spec))
	if err != nil {
		return nil, err
	}
	o := &output{r: r, full: &table.Schema{Fields: append([]table.Field(nil), r.Schema().Fields...)}}
	fail := func(err error) (*output, error) {
		o.close()
		return nil, err
	}
	if check != nil {
		if err := check(o.full); err != nil {
			return fail(err)
		}
	}
	schema, kept, _, err := m.OutputSchema(name, o.full, use)
	if err != nil {
		return fail(err)
	}
	format := outputFormat(out, wopts)
	nested := keptNested(nestedOf(r), keep)
	if err := checkNestedOutput(name, nested, o.full.Names(), format, use); err != nil {
		return fail(err)
	}
	if parts := parquetParts(r, path); parts != nil && format == tableio.Parquet && len(kept)+len(nested) > 0 {
		if o.src, err = pqio.OpenSources(parts); err != nil {
			return fail(err)
		}
		copied := make([]bool, len(schema.Fields))
		any := false
		read := map[string]bool{}
		for _, c := range m.EncodeReads(use) {
			read[c] = true
		}
		for i, k := range kept {
			f := o.full.Fields[k]
			if o.src.CanCopy(f.Name) == nil {
				copied[i], any = true, true
			} else {
				read[f.Name] = true
			}
		}
		for _, n := range nested {
			if err := o.src.CanCopy(n.Name); err != nil {
				if !errors.Is(err, table.ErrCorrupt) {
					err = fmt.Errorf("%w: %w", table.ErrCorrupt, err)
				}
				return fail(fmt.Errorf("%s: nested column %q cannot be copied: %w", name, n.Name, err))
			}
		}
		if any || len(nested) > 0 {
			var sel []int
			for i, f := range o.full.Fields {
				if read[f.Name] {
					sel = append(sel, i)
				}
			}
			if err := r.Select(sel); err != nil {
				return fail(err)
			}
			wopts.Parquet.Source, wopts.Parquet.Copy, wopts.Parquet.Nested = o.src, copied, nested
		} else {
			o.src.Close()
			o.src = nil
		}
	}
	// Text that is not UTF-8 is refused in a Parquet or Arrow output,
	// naming the input; found at once (a column name), it is bad data,
	// not an output failure.
	wopts.Input, wopts.CheckUTF8 = name, true
	if o.w, err = tableio.Create(out, schema, wopts); err != nil {
		return fail(commitError(err))
	}
	// Reading, encoding and writing overlap: the next batch is decoded
	// and the last one written while the current one is encoded.
	o.r = table.ReadAhead(o.r)
	o.w.Writer = table.WriteBehind(o.w.Writer)
	return o, nil
}

// parquetParts returns the Parquet files the table r (opened from path)
// reads, in order: path itself, or a dataset's files when they are all
// Parquet; nil otherwise.
func parquetParts(r table.Reader, path string) []string {
	switch b := derive.Base(r).(type) {
	case *pqio.Reader:
		return []string{path}
	case *dataset.Reader:
		var parts []string
		for _, f := range b.Files() {
			if !tableio.IsParquet(f.Path) {
				return nil
			}
			parts = append(parts, f.Path)
		}
		return parts
	}
	return nil
}

// close closes the reader and the source (not the output).
func (o *output) close() {
	o.r.Close()
	if o.src != nil {
		o.src.Close()
	}
}
