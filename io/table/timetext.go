package table

import "time"

// Layouts of a timestamp's text (AppendTimestamp): the fraction of a
// second is written only when it is not zero, with at most the unit's
// digits and no trailing zero, as Go's .999999999 drops them.
const (
	timestampUTC   = "2006-01-02T15:04:05.999999999Z"
	timestampLocal = "2006-01-02T15:04:05.999999999"
)

// AppendDate appends the ISO 8601 calendar date of the day days after
// 1970-01-01 (2026-12-04), as the readers show a date column.
func AppendDate(dst []byte, days int64) []byte {
	return time.Unix(days*86400, 0).UTC().AppendFormat(dst, time.DateOnly)
}

// AppendTimestamp appends the ISO 8601 date and time of v units of
// 1/perSecond second (1, 1e3, 1e6 or 1e9) since 1970-01-01T00:00:00, as
// the readers show a timestamp column: the fraction of a second only when
// it is not zero, to at most the unit's digits (3 for milliseconds, 6 for
// microseconds, 9 for nanoseconds) with trailing zeros dropped; then Z
// when utc (the timestamp is an instant, shown in UTC), nothing otherwise
// (a local wall clock time of no stated zone). 2026-12-04T17:58:01Z,
// 2026-12-04T17:58:01.25Z, 2026-12-04T17:58:01.
func AppendTimestamp(dst []byte, v, perSecond int64, utc bool) []byte {
	sec, frac := v/perSecond, v%perSecond
	if frac < 0 {
		sec, frac = sec-1, frac+perSecond
	}
	layout := timestampLocal
	if utc {
		layout = timestampUTC
	}
	return time.Unix(sec, frac*(1_000_000_000/perSecond)).UTC().AppendFormat(dst, layout)
}
