package pqio

import (
	"fmt"
	"os"
)

// OpenFile reads the Parquet file f, opened by a caller that checked what
// it is (a regular file, say); name is used in errors. The Reader's Close
// closes f; when OpenFile fails, f is left open.
func OpenFile(f *os.File, name string) (*Reader, error) {
	st, err := f.Stat()
	if err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	r, err := openReaderAt(name, f, st.Size())
	if err != nil {
		return nil, err
	}
	r.file = f
	return r, nil
}
