package pipeline

import (
	"fmt"
	"path/filepath"
	"slices"
	"testing"

	"manyfold/encoders/method"
	"manyfold/io/derive"
	"manyfold/io/table"
	"manyfold/io/tableio"
)

// writeIDs writes a table of n rows in format f: id, unique in the first
// unique rows and repeating them after; delay, minutes 0 to 59; late,
// delay>15 as 0 or 1.
func writeIDs(t *testing.T, path string, f tableio.Format, n, unique int) {
	t.Helper()
	s := &table.Schema{Fields: []table.Field{{Name: "id", Kind: table.String}, {Name: "delay", Kind: table.Int64}, {Name: "late", Kind: table.Int64}}}
	out, err := tableio.Create(path, s, tableio.WriteOptions{Format: f})
	if err != nil {
		t.Fatal(err)
	}
	const size = 10000
	for at := 0; at < n; at += size {
		rows := min(size, n-at)
		id := table.Column{Form: table.FormText, Offsets: []int32{0}}
		delay := table.Column{Form: table.FormInt64}
		late := table.Column{Form: table.FormInt64}
		for i := at; i < at+rows; i++ {
			id.Data = fmt.Appendf(id.Data, "id%06d", i%unique)
			id.Offsets = append(id.Offsets, int32(len(id.Data)))
			d := int64(i * 37 % 60)
			delay.Ints = append(delay.Ints, d)
			late.Ints = append(late.Ints, map[bool]int64{true: 1, false: 0}[d > 15])
		}
		if err := out.Write(&table.Batch{Rows: rows, Cols: []table.Column{id, delay, late}}); err != nil {
			t.Fatal(err)
		}
	}
	if err := out.Commit(); err != nil {
		t.Fatal(err)
	}
}

// hidden is a reader that shows nothing of the reader under it.
type hidden struct{ table.Reader }

// TestDerivedTargetSeesRowCount: Fit sizes the level table of a column
// whose first rows are nearly all distinct by the input's row count, known
// before reading for Parquet and estimated from the bytes read for CSV. A
// derived target (delay>15) puts a reader of derived columns under
// encode's ReadAhead, over the file's reader; the fit still finds the
// count and behaves as with the plain target of the same values (late):
// the same classes and level statistics, and a level table of the same
// size, which a reader that hides the count does not give.
func TestDerivedTargetSeesRowCount(t *testing.T) {
	for _, f := range []tableio.Format{tableio.Parquet, tableio.CSV} {
		t.Run(string(f), func(t *testing.T) {
			path := filepath.Join(t.TempDir(), "ids."+string(f))
			writeIDs(t, path, f, 3*presizeRows, presizeRows+presizeRows/5)
			checkRowCountSeen(t, path)
		})
	}
}

// checkRowCountSeen fits the table at path with the plain target, the
// derived one and the plain one under a reader that hides the count.
func checkRowCountSeen(t *testing.T, path string) {
	fit := func(target string, wrap func(table.Reader) table.Reader) *Model {
		t.Helper()
		r, err := tableio.Open(path, tableio.ReadOptions{})
		if err != nil {
			t.Fatal(err)
		}
		defer r.Close()
		if r, err = derive.Wrap(r, []string{target}); err != nil {
			t.Fatal(err)
		}
		sp := DefaultSpec()
		sp.Target, sp.Columns = target, []string{"id"}
		if sp.Encodings, err = method.ParsePlan("target:eb"); err != nil {
			t.Fatal(err)
		}
		m, err := Fit(wrap(r), sp, FitOptions{File: path})
		if err != nil {
			t.Fatal(err)
		}
		return m
	}
	plain := fit("late", table.ReadAhead)
	derived := fit("delay>15", table.ReadAhead)
	blind := fit("late", func(r table.Reader) table.Reader { return table.ReadAhead(hidden{r}) })
	size := func(m *Model) int { return m.Cols[0].St.Levels.MemBytes() }
	if size(blind) == size(plain) {
		t.Fatalf("the level table is %d bytes with the row count and without it: the test does not see the presizing", size(plain))
	}
	if size(derived) != size(plain) {
		t.Errorf("level table: %d bytes with the derived target, %d with the plain one", size(derived), size(plain))
	}
	if !slices.Equal(derived.Classes, plain.Classes) || derived.Pos != plain.Pos || derived.Rows != plain.Rows {
		t.Errorf("derived: classes %v pos %d rows %d; plain: %v %d %d", derived.Classes, derived.Pos, derived.Rows, plain.Classes, plain.Pos, plain.Rows)
	}
	if d, p := derived.Cols[0].St, plain.Cols[0].St; d.Levels.Len() != p.Levels.Len() || !slices.Equal(d.CellTotals(), p.CellTotals()) {
		t.Errorf("derived: %d levels, totals %v; plain: %d, %v", d.Levels.Len(), d.CellTotals(), p.Levels.Len(), p.CellTotals())
	}
}
