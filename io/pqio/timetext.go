package pqio

import (
	"strconv"

	"github.com/parquet-go/parquet-go"
	"github.com/parquet-go/parquet-go/deprecated"
	"github.com/parquet-go/parquet-go/encoding"
	"github.com/parquet-go/parquet-go/format"

	"manyfold/io/table"
)

// textOf is how an integer column is read as text (a leaf's toText), or
// nil when it is read as int.
type textOf func(dst []byte, v int64) []byte

// appendUnsigned appends v as an unsigned decimal.
func appendUnsigned(dst []byte, v int64) []byte { return strconv.AppendUint(dst, uint64(v), 10) }

// appendDate appends the DATE v (days since 1970-01-01) as ISO 8601.
func appendDate(dst []byte, v int64) []byte { return table.AppendDate(dst, v) }

// timestampText returns the textOf of a timestamp in units per second
// (1e3, 1e6 or 1e9), adjusted to UTC or not (see table.AppendTimestamp:
// the fraction of a second to at most the unit's digits, only when it is
// not zero).
func timestampText(perSecond int64, utc bool) textOf {
	return func(dst []byte, v int64) []byte { return table.AppendTimestamp(dst, v, perSecond, utc) }
}

// timeText returns how a column of type t is read as text: its dates and
// timestamps (logical or converted type, and the legacy INT96, taken as
// UTC nanoseconds) as ISO 8601, its unsigned 64-bit integers as decimal;
// nil for the other columns.
func timeText(t parquet.Type, phys parquet.Kind) textOf {
	if phys == parquet.Int96 {
		return timestampText(1e9, true)
	}
	if phys == parquet.Int64 && isUnsigned(t) {
		return appendUnsigned
	}
	if lt := t.LogicalType(); lt != nil {
		switch v := lt.Value.(type) {
		case *format.DateType:
			if phys == parquet.Int32 {
				return appendDate
			}
		case *format.TimestampType:
			if phys != parquet.Int64 {
				return nil
			}
			switch v.Unit.Value.(type) {
			case *format.MilliSeconds:
				return timestampText(1e3, v.IsAdjustedToUTC)
			case *format.MicroSeconds:
				return timestampText(1e6, v.IsAdjustedToUTC)
			case *format.NanoSeconds:
				return timestampText(1e9, v.IsAdjustedToUTC)
			}
		}
		return nil
	}
	if ct := t.ConvertedType(); ct != nil {
		switch {
		case *ct == deprecated.Date && phys == parquet.Int32:
			return appendDate
		case *ct == deprecated.TimestampMillis && phys == parquet.Int64:
			return timestampText(1e3, true)
		case *ct == deprecated.TimestampMicros && phys == parquet.Int64:
			return timestampText(1e6, true)
		}
	}
	return nil
}

// intValues returns the first n values of an INT32, INT64 or INT96 page
// or dictionary as int64 (INT96 as nanoseconds since the epoch), converted
// into buf where they need it, and how many the data holds.
func intValues(data encoding.Values, phys parquet.Kind, n int, buf []int64) (vals, nbuf []int64, have int) {
	switch phys {
	case parquet.Int32:
		v := data.Int32()
		buf = grow(buf, min(len(v), n))
		for i := range buf {
			buf[i] = int64(v[i])
		}
		return buf, buf, len(v)
	case parquet.Int96:
		v := data.Int96()
		buf = grow(buf, min(len(v), n))
		for i := range buf {
			buf[i] = int96Nanos(v[i])
		}
		return buf, buf, len(v)
	}
	v := data.Int64()
	return v[:min(len(v), n)], buf, len(v)
}

// intTexts writes the text of each of v into text and their offsets
// (len(v)+1) into offs, reusing both buffers.
func intTexts(text []byte, offs []uint32, v []int64, conv textOf) ([]byte, []uint32) {
	text, offs = text[:0], append(offs[:0], 0)
	for _, x := range v {
		text = conv(text, x)
		offs = append(offs, uint32(len(text)))
	}
	return text, offs
}
