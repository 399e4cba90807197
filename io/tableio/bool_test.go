package tableio

import (
	"io"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	"manyfold/io/csvio"
	"manyfold/io/table"
)

// TestBoolTextSameInEveryWriter: a CSV column forced to bool, written as
// t/f/T/F/1/0 and in words, reads as the same booleans whichever format
// it is written to, and a text that is no boolean is refused by each
// writer with the same message.
func TestBoolTextSameInEveryWriter(t *testing.T) {
	in := "late\nt\nf\nT\nF\n1\n0\ntrue\nFALSE\nTrue\n\n"
	want := []string{"true", "false", "true", "false", "true", "false", "true", "false", "true", "<null>"}
	for _, file := range []string{"out.parquet", "out.arrow", "out.csv"} {
		path := filepath.Join(t.TempDir(), file)
		r, err := csvio.NewReader(strings.NewReader(in), "in.csv", csvio.Options{Types: map[string]table.Kind{"late": table.Bool}})
		if err != nil {
			t.Fatal(err)
		}
		out, err := Create(path, r.Schema(), WriteOptions{})
		if err != nil {
			t.Fatal(err)
		}
		b, err := r.Next()
		if err != nil {
			t.Fatal(err)
		}
		if err := out.Write(b); err != nil {
			t.Fatalf("%s: %v", file, err)
		}
		if err := out.Commit(); err != nil {
			t.Fatalf("%s: %v", file, err)
		}
		if got := readBools(t, path); !slices.Equal(got, want) {
			t.Errorf("%s: read back %v, want %v", file, got, want)
		}
	}
	// A value that is no boolean: the same message from every writer
	// that converts text to booleans.
	bad := &table.Batch{Rows: 1, Cols: []table.Column{{Form: table.FormText, Data: []byte("yes"), Offsets: []int32{0, 3}}}}
	schema := &table.Schema{Fields: []table.Field{{Name: "late", Kind: table.Bool, Nullable: true}}}
	for _, file := range []string{"out.parquet", "out.arrow"} {
		out, err := Create(filepath.Join(t.TempDir(), file), schema, WriteOptions{})
		if err != nil {
			t.Fatal(err)
		}
		err = out.Write(bad)
		if err == nil {
			err = out.Commit()
		} else {
			out.Abort()
		}
		if err == nil || !strings.Contains(err.Error(), `"yes" is not a boolean`) {
			t.Errorf("%s: %v, want \"yes\" is not a boolean", file, err)
		}
	}
}

// readBools reads the one column of the table at path as booleans' text,
// parsing text (a CSV's) with table.ParseBool.
func readBools(t *testing.T, path string) []string {
	t.Helper()
	r, err := Open(path, ReadOptions{CSV: csvio.Options{Types: map[string]table.Kind{"late": table.Bool}}})
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	var got []string
	for {
		b, err := r.Next()
		if err == io.EOF {
			return got
		}
		if err != nil {
			t.Fatal(err)
		}
		c := &b.Cols[0]
		for i := 0; i < b.Rows; i++ {
			switch {
			case c.IsNull(i):
				got = append(got, "<null>")
			case c.Form == table.FormBool:
				got = append(got, string(c.AppendText(nil, i)))
			default:
				v, err := table.ParseBool(c.Bytes(i))
				if err != nil {
					t.Fatalf("%s row %d: %v", path, i, err)
				}
				got = append(got, strconv.FormatBool(v))
			}
		}
	}
}
