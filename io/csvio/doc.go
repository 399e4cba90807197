// Package csvio reads and writes CSV tables as manyfold column batches.
//
// # Reading
//
// NewReader splits the input with a hand-written scanner that follows RFC
// 4180 section 2, with these rules:
//
//   - Records end at LF or CRLF. A CR that is not followed by LF is data,
//     except a CR that is the very last byte of the input, which is dropped.
//     Lines that end in CR alone (old Mac text files) are not read: such a
//     file reads as one long header, and a header field holding a CR that
//     no LF follows is reported as such.
//   - A NUL byte anywhere is an error naming its line and column: CSV is
//     text, and a NUL is the sign of a binary file.
//   - A UTF-8 byte order mark at the start of the input is dropped.
//   - Input compressed with gzip or zstd is recognised by its magic bytes and
//     decompressed on the fly.
//   - A field may be enclosed in double quotes; inside, delimiters, CR and LF
//     are data and a doubled quote stands for one quote. Bytes inside a
//     quoted field are kept exactly as written (a CRLF stays CRLF).
//   - Strictness (RFC 4180 section 2, rules 5 to 7): a quote may only open a
//     field (as its very first byte) or appear doubled inside a quoted
//     field. A quote anywhere else in an unquoted field is an error, and so
//     is any byte other than the delimiter or a line end after a closing
//     quote. A quote that is never closed is an error naming the line where
//     it opened. Spaces are data and are never trimmed.
//   - Nulls: an empty unquoted field is null; a quoted empty field ("") is
//     the empty string, which is not null.
//   - Blank lines (empty, or a lone CR before LF) are skipped when the table
//     has more than one column. In a one-column table a blank line is a row
//     whose value is null, so that what the Writer writes reads back the
//     same.
//   - The first non-blank record is the header unless Options.NoHeader is
//     set, in which case the columns are named col1, col2, ... Header names
//     must be non-empty and distinct. Every record must have as many fields
//     as the header.
//   - A field may span at most Options.MaxFieldBytes bytes as written,
//     quotes included (DefaultMaxFieldBytes, 16 MiB, unless set): a longer
//     one is an error naming its line and column, found as soon as the
//     bytes read pass the limit, so that memory stays bounded. A record may
//     span at most 512 MiB, or the field limit if that is set higher
//     (about: the check is made when the read buffer is refilled), so that
//     a stray quote cannot make the reader hold the rest of a large file.
//   - An input that holds no bytes, or only a byte order mark and white
//     space, is an error wrapping table.ErrEmpty. A header with no rows is a
//     valid table of zero rows.
//
// Every column is delivered in table.FormText. Each column's kind in the
// schema is inferred from the first Options.SampleRows rows (which are
// buffered and then delivered, so the input need not be seekable), looking
// at non-null values only:
//
//   - int: every value is a decimal int64 with an optional minus sign, no
//     plus sign and no leading zero ("0" itself is fine);
//   - float: every value is a decimal number (optional sign, digits with an
//     optional point, optional exponent) or NaN, Inf, +Inf, -Inf, again with
//     no leading zero before another digit, and no value is an integer
//     (digits with an optional sign) beyond the range of int64: as floats
//     such integers would lose digits and distinct ids would collapse, so
//     their column is text, each value kept as written;
//   - bool: every value is true or false (also TRUE, True, FALSE, False);
//   - text otherwise, and when the sample has no non-null value.
//
// A value with a leading zero such as "00501" makes its column text, so that
// codes keep their zeros. Options.Types overrides the inferred kinds, and
// so does Options.TypesIfPresent for the columns the header has. Kinds
// are logical only: the data stays text. But every value of an int, float
// or bool column, inferred or forced, past the sample too, must read as its
// kind the way the writers parse it (an int may then also be written with
// leading zeros, or as a number without a fraction such as 3.0; a bool as
// table.ParseBool accepts: 1, t, T, true, TRUE, True and 0, f, F, false,
// FALSE, False), so that a value that does not is reported by the reader,
// whatever the output format, as a *KindError inside the *table.DataError.
//
// Bad data is reported as a *table.DataError naming the file, the line and,
// where known, the column.
//
// # Writing
//
// NewWriter writes a header line and then one line per row, ending lines
// with LF. A field is quoted (RFC 4180 section 2, rules 5 to 7) only when it
// holds the delimiter, a quote, CR or LF, starts or ends with a space or tab,
// or is a non-null empty string; a null is an empty unquoted field.
package csvio

import "errors"

// ErrTypeColumn is wrapped by the error NewReader returns when
// Options.Types names a column the header does not have.
var ErrTypeColumn = errors.New("a type is given for a column the header lacks")
