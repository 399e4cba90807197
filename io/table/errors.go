package table

import (
	"errors"
	"strconv"
	"strings"
)

// DataError reports bad data found while reading or converting a table. It
// names the file and, where known, the line (CSV, 1-based, counting the
// header), the row (1-based data row) and the column.
type DataError struct {
	File   string
	Line   int64 // 0 when unknown or not line-based
	Row    int64 // 0 when unknown
	Column string
	Err    error
}

// Error formats the error as "file:line: column "c": message", dropping the
// parts that are unknown; without a line it reads "file: row N: ...".
func (e *DataError) Error() string {
	var b strings.Builder
	b.WriteString(e.File)
	if e.Line > 0 {
		b.WriteString(":")
		b.WriteString(strconv.FormatInt(e.Line, 10))
	}
	b.WriteString(": ")
	if e.Line == 0 && e.Row > 0 {
		b.WriteString("row ")
		b.WriteString(strconv.FormatInt(e.Row, 10))
		b.WriteString(": ")
	}
	if e.Column != "" {
		b.WriteString("column ")
		b.WriteString(strconv.Quote(e.Column))
		b.WriteString(": ")
	}
	if e.Err != nil {
		b.WriteString(e.Err.Error())
	}
	return b.String()
}

// Unwrap returns the underlying error.
func (e *DataError) Unwrap() error { return e.Err }

// Errors that readers wrap when a file cannot be read as a table at all.
var (
	// ErrUnknownFormat: the file is neither CSV, Parquet nor Arrow IPC.
	ErrUnknownFormat = errors.New("not a CSV, NDJSON, Parquet or Arrow IPC file")
	// ErrEmpty: the file holds no bytes, or no header.
	ErrEmpty = errors.New("file is empty")
	// ErrCorrupt: the file claims a format but its structure is broken
	// (a truncated Parquet footer, a bad Arrow message).
	ErrCorrupt = errors.New("file is corrupt or truncated")
)
