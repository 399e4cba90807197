package csvio

import (
	"bytes"
	"encoding/csv"
	"errors"
	"io"
	"math"
	"reflect"
	"strings"
	"testing"

	"manyfold/io/table"
)

// FuzzReader holds the reader against the standard library's encoding/csv
// (strict quotes, a fixed field count) on the same input. Where the two are
// meant to differ, the differences are allowed for:
//   - encoding/csv turns CRLF inside a quoted field into LF; manyfold keeps
//     the bytes, so manyfold's values are compared with CRLF replaced;
//   - encoding/csv keeps a byte order mark; it is given the input without;
//   - encoding/csv skips blank lines always; in a one-column table manyfold
//     reads them as null rows, which are dropped before comparing;
//   - manyfold rejects empty input (only white space), empty or repeated
//     header names and a header holding a CR that no LF follows (lines
//     ending in CR alone), which encoding/csv accepts;
//   - manyfold rejects every input that holds a NUL byte;
//   - a value past the inference sample that does not read as the kind
//     inferred from the sample is an error; the input is then read again
//     with every row in the sample, which must give no such error.
//
// Otherwise both must accept or both reject the input, and accepted input
// must give the same records, a null being an empty value.
func FuzzReader(f *testing.F) {
	seeds := []string{
		"a,b,c\n1,2,3\n",
		"aaa,bbb,ccc\r\nzzz,yyy,xxx\r\n",
		"\"aaa\",\"b\r\nbb\",\"ccc\"\r\nzzz,yyy,xxx",
		"\"aaa\",\"b\"\"bb\",\"ccc\"",
		"id,note\n1,\"ring\nthen\"\n2,\"\"\n3,\n",
		"a\n1\n\n2\n",
		"a,b\n\n1,2\n\r\n",
		"a,b\n1,\"x\"y\n",
		"a,b\n1,x\"y\n",
		"a,b\n1,\"open\n",
		"a,b\n1,2,3\n",
		"\xef\xbb\xbfa;b\n1;2\n",
		"a\tb\n\"x\ty\"\t2\n",
		"a|b\n1|2\r",
		"a,a\n1,2\n",
		" \n",
		"a,b\nx\ry,z\r\r\n",
		"\"a\"\r\n\"b\"\r",
		"a\n0\n1\nA\n",          // a bad value past the sample, in the batch of good rows
		"a,b,c\r1,x,y\r2,x,y\r", // CR-only line ends
		"a,b\n1,x\x00y\n",       // a NUL byte
		"a\n18446744073709551615\n18446744073709551614\n",
	}
	for i, s := range seeds {
		f.Add([]byte(s), uint8(i))
	}
	old := bufSize
	defer func() { bufSize = old }()
	f.Fuzz(func(t *testing.T, data []byte, mode uint8) {
		delim := []byte{',', ';', '\t', '|'}[mode%4]
		noHeader := mode&4 != 0
		bufSize = 1 << 20
		if mode&8 != 0 {
			bufSize = 8
		}
		opts := Options{Delimiter: delim, NoHeader: noHeader, BatchRows: int(mode>>4)%5 + 1, SampleRows: 2}

		cr := csv.NewReader(bytes.NewReader(bytes.TrimPrefix(data, bom)))
		cr.Comma = rune(delim)
		var want [][]string
		var werr error
		for {
			rec, err := cr.Read()
			if err == io.EOF {
				break
			}
			if err != nil {
				werr = err
				break
			}
			want = append(want, rec)
		}

		got, gerr := fuzzRead(data, opts)
		read := opts // the options of the read compared
		if bytes.IndexByte(data, 0) >= 0 {
			if gerr == nil {
				t.Fatalf("input with a NUL byte accepted as %q", got)
			}
			return
		}
		var ke *KindError
		if errors.As(gerr, &ke) {
			read.SampleRows = math.MaxInt32
			if got, gerr = fuzzRead(data, read); errors.As(gerr, &ke) {
				t.Fatalf("a value does not read as the kind inferred from every row: %v", gerr)
			}
		}
		if werr != nil {
			if gerr == nil {
				t.Fatalf("encoding/csv rejects the input (%v) but manyfold accepts it: %q", werr, got)
			}
			return
		}
		if gerr != nil {
			switch {
			case errors.Is(gerr, table.ErrEmpty):
				if hasNonSpace(bytes.TrimPrefix(data, bom)) {
					t.Fatalf("ErrEmpty for input that is not blank")
				}
			case !noHeader && (errors.Is(gerr, errEmptyName) || errors.Is(gerr, errDupName) || errors.Is(gerr, errBareCR)):
			default:
				t.Fatalf("manyfold rejects input that encoding/csv accepts as %q: %v", want, gerr)
			}
			return
		}
		checkFieldLimit(t, data, read, got)
		if len(got) > 0 && len(got[0]) == 1 {
			kept := got[:1]
			for _, rec := range got[1:] {
				if rec[0] != null {
					kept = append(kept, rec)
				}
			}
			got = kept
		}
		if len(got) != len(want) {
			t.Fatalf("%d records, encoding/csv %d:\n%q\n%q", len(got), len(want), got, want)
		}
		for i := range got {
			if len(got[i]) != len(want[i]) {
				t.Fatalf("record %d: %d fields, encoding/csv %d", i+1, len(got[i]), len(want[i]))
			}
			for j, v := range got[i] {
				if v == null {
					v = ""
				}
				if v = strings.ReplaceAll(v, "\r\n", "\n"); v != want[i][j] {
					t.Fatalf("record %d field %d: %q, encoding/csv %q", i+1, j+1, v, want[i][j])
				}
			}
		}
	})
}

// checkFieldLimit reads data again with a small field limit: the read
// must give the records got unless a field is longer than the limit, and
// must refuse a field whose value alone is longer. A field as written is
// at most twice its value's length (every byte a doubled quote) plus its
// two quotes.
func checkFieldLimit(t *testing.T, data []byte, opts Options, got [][]string) {
	opts.MaxFieldBytes = len(data)%13 + 1
	longest := 0
	for _, rec := range got {
		for _, v := range rec {
			if v != null {
				longest = max(longest, len(v))
			}
		}
	}
	lgot, lerr := fuzzRead(data, opts)
	switch {
	case lerr == nil:
		if longest > opts.MaxFieldBytes {
			t.Fatalf("a value of %d bytes read with a field limit of %d", longest, opts.MaxFieldBytes)
		}
		if !reflect.DeepEqual(lgot, got) {
			t.Fatalf("with a field limit of %d: %q, without: %q", opts.MaxFieldBytes, lgot, got)
		}
	case errors.Is(lerr, errFieldSize):
		if 2*longest+2 <= opts.MaxFieldBytes {
			t.Fatalf("no field can pass the limit of %d (longest value %d bytes): %v", opts.MaxFieldBytes, longest, lerr)
		}
	default:
		t.Fatalf("with a field limit of %d: %v", opts.MaxFieldBytes, lerr)
	}
}

// fuzzRead returns the header (unless opts.NoHeader) and the records.
func fuzzRead(data []byte, opts Options) ([][]string, error) {
	res, err := readAll(data, opts, nil)
	if err != nil {
		return nil, err
	}
	var out [][]string
	if !opts.NoHeader {
		out = append(out, res.names)
	}
	return append(out, res.rows...), nil
}
