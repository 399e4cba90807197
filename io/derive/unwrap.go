package derive

import "manyfold/io/table"

// Unwrap returns the reader under the derived columns (table.Wrapper), so
// that table.Find reaches what it implements: a Parquet file's row count,
// a CSV file's bytes read.
func (w *Reader) Unwrap() table.Reader { return w.base }
