package pipeline

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"runtime/trace"
	"slices"
	"strings"

	"manyfold/encoders/colstats"
	"manyfold/encoders/exactsum"
	"manyfold/encoders/method"
	"manyfold/internal/jsonout"
	"manyfold/internal/param"
	"manyfold/io/atomicfile"
	"manyfold/io/csvio"
	"manyfold/io/pqio"
	"manyfold/io/table"
	"manyfold/io/tableio"
)

// FormatVersion is the version of the mapping-table layout. Tables of
// another version are refused with a message to refit them. 2: the
// manifest records each table's checksum and the target's origin, and a
// table of a column with a column prior has parent_row. 3: each column
// lists its encodings in the grammar, with what each recorded of its fit,
// and a table holds the statistics and each encoding's own columns.
const FormatVersion = 3

// Version is manyfold's version, recorded in every manifest.
const Version = "0.1.0"

// ManifestName is the manifest's file name in a tables directory.
const ManifestName = "manifest.json"

// Manifest describes a directory of mapping tables: what was fitted, on
// what, with which parameters.
type Manifest struct {
	Format  int             `json:"format"`
	Tool    string          `json:"tool"`
	Input   []ManifestField `json:"input"`
	Target  string          `json:"target,omitempty"`
	Task    string          `json:"task,omitempty"`
	Classes []string        `json:"classes,omitempty"`
	Rows    int64           `json:"rows"`
	Missing int64           `json:"target_missing"`
	// Origin is, for a regression target, the value the tables' target
	// sums are taken about (colstats.Stats.Origin): target_sum holds
	// sum(y - origin) and target_sumsq sum((y - origin)^2). Absent (0) in
	// tables written before it existed, whose sums are of y itself.
	Origin  float64       `json:"target_origin,omitempty"`
	Params  Params        `json:"params"`
	Columns []ManifestCol `json:"columns"`
}

// ManifestField is an input column.
type ManifestField struct {
	Name string `json:"name"`
	Type string `json:"type"`
}

// Params records the parameters of the fit that are not an encoding's.
type Params struct {
	Folds        int    `json:"folds"`
	FoldBy       string `json:"fold_by"`
	Seed         uint64 `json:"seed"`
	Scheme       string `json:"scheme"`
	MinLevelRows uint64 `json:"min_level_rows"`
	Nulls        string `json:"nulls"`
}

// ManifestCol describes one encoded column's table.
type ManifestCol struct {
	Name        string `json:"name"`
	Type        string `json:"type"`
	Table       string `json:"table"`
	ParentTable string `json:"parent_table,omitempty"`
	TableSum    string `json:"table_xxh64"`                  // xxh64 of the table file, 16 hexadecimal digits
	ParentSum   string `json:"parent_table_xxh64,omitempty"` // and of the parent table
	Levels      int    `json:"levels"`
	Stored      int    `json:"levels_stored"`
	// Encodings lists the column's encodings in the grammar, each with
	// what its fit recorded (a prior, a smoothing weight).
	Encodings []ManifestEnc `json:"encodings"`
	// TrainingScore is the Score of the column's target mean against the
	// target over the training rows with a known target, computed from the
	// training pass's out-of-fold values: the AUC for a binary target, the
	// RMSE for regression. apply's drift report sets the score on new rows
	// against it. Absent without a target encoding, for a multi-class
	// target, for tables written without a training pass (merge) and for
	// a column of more distinct encoded values than maxScoreValues.
	TrainingScore *float64 `json:"training_score,omitempty"`
}

// ManifestEnc is one encoding of a column.
type ManifestEnc struct {
	Encoding string          `json:"encoding"`
	Fit      json.RawMessage `json:"fit,omitempty"`
}

// ManifestError reports mapping tables that cannot serve the input: Msg,
// or Err when the message names parameters (a param.Error).
type ManifestError struct {
	Dir string
	Msg string
	Err error
}

func (e *ManifestError) Error() string {
	if e.Err != nil {
		return e.Dir + ": " + e.Err.Error()
	}
	return e.Dir + ": " + e.Msg
}

// Unwrap returns Err.
func (e *ManifestError) Unwrap() error { return e.Err }

// tableFile names the table of the i-th column: its position and a form of
// its name safe in any file system.
func tableFile(i int, name string) string {
	var b strings.Builder
	for _, r := range name {
		if r < 0x80 && (r == '-' || r == '_' || r == '.' || (r >= '0' && r <= '9') || (r|0x20 >= 'a' && r|0x20 <= 'z')) {
			b.WriteRune(r)
		} else {
			b.WriteByte('_')
		}
	}
	return fmt.Sprintf("%02d-%s.parquet", i+1, b.String())
}

// Manifest returns the manifest of the fitted model.
func (m *Model) Manifest() (Manifest, error) {
	sp := &m.Spec
	mf := Manifest{Format: FormatVersion, Tool: Version, Rows: m.Rows, Missing: m.Missing, Target: sp.Target, Origin: m.Origin}
	for _, f := range m.Input {
		mf.Input = append(mf.Input, ManifestField{Name: f.Name, Type: f.Kind.String()})
	}
	if sp.Target != "" && (m.supervised() || sp.FoldBy.Needs().Class) {
		mf.Task = m.Task.String()
		mf.Classes = m.Classes
	} else {
		mf.Target = ""
	}
	nulls := "level"
	if sp.NullsUnseen {
		nulls = "unseen"
	}
	mf.Params = Params{Folds: sp.Folds, FoldBy: sp.FoldBy.String(), Seed: sp.Seed, Scheme: sp.Scheme.String(),
		MinLevelRows: sp.MinLevelRows, Nulls: nulls}
	for i, c := range m.Cols {
		mc := ManifestCol{Name: c.Name, Type: c.Kind.String(), Table: tableFile(i, c.Name), Levels: m.Levels(i)}
		for l := range c.Keep {
			if c.Keep[l] {
				mc.Stored++
			}
		}
		if c.Parent != nil {
			mc.ParentTable = strings.TrimSuffix(mc.Table, ".parquet") + ".parents.parquet"
		}
		for ei, f := range c.Fits {
			me := ManifestEnc{Encoding: sp.EncodingsOf(i)[ei].String()}
			if v := f.Manifest(); v != nil {
				raw, err := json.Marshal(v)
				if err != nil {
					return Manifest{}, fmt.Errorf("manifest of %s: %w", me.Encoding, err)
				}
				me.Fit = raw
			}
			mc.Encodings = append(mc.Encodings, me)
		}
		mf.Columns = append(mf.Columns, mc)
	}
	return mf, nil
}

// SaveTables writes one Parquet table per column (and per parent level
// set) and the manifest into a directory staged beside dir, then puts it
// in place of dir whole (see StageTables).
func (m *Model) SaveTables(dir string) error {
	st, err := m.StageTables(dir)
	if err != nil {
		return err
	}
	return st.Commit()
}

// StagedTables are mapping tables written to a temporary directory beside
// their final one, ".DIR.tmp-*", so that a failure leaves the final
// directory as it was. It is an atomicfile.Output: Ready makes the files
// durable, Commit replaces the directory whole (no table of an earlier
// fit stays beside the new manifest), Abort removes the staged tables.
type StagedTables struct {
	*atomicfile.Dir
}

// StageTables writes the mapping tables into a temporary directory beside
// dir, creating dir's parents if needed; Commit puts it in place of dir,
// Abort removes it. An existing dir is replaced only if it holds mapping
// tables and nothing else (CheckTablesDir). It only reads the model, so it
// may run while Encode runs.
func (m *Model) StageTables(dir string) (*StagedTables, error) {
	d, err := atomicfile.CreateDir(dir, CheckTablesDir)
	if err != nil {
		return nil, fmt.Errorf("tables: %w", err)
	}
	st := &StagedTables{Dir: d}
	if err := m.writeTables(d.Name()); err != nil {
		st.Abort()
		return nil, err
	}
	return st, nil
}

// CheckTablesDir returns an error unless dir may be replaced by mapping
// tables: it does not exist, or it is a directory holding nothing but
// regular files named like the files of a tables directory (the manifest
// and .parquet tables). Since the tables replace the whole directory, a
// directory of anything else is refused rather than removed.
func CheckTablesDir(dir string) error {
	fi, err := os.Stat(dir)
	if errors.Is(err, os.ErrNotExist) {
		return nil
	}
	if err != nil {
		return err
	}
	if !fi.IsDir() {
		return fmt.Errorf("%s exists and is not a directory", dir)
	}
	entries, err := os.ReadDir(dir)
	if err != nil {
		return err
	}
	for _, e := range entries {
		n := e.Name()
		if !e.Type().IsRegular() || !(n == ManifestName || strings.HasSuffix(n, ".parquet")) {
			return fmt.Errorf("%s holds %s, which is not a mapping table; the tables replace the whole directory, so give a new or a tables directory", dir, n)
		}
	}
	return nil
}

// writeTables writes the tables and the manifest into dir.
func (m *Model) writeTables(dir string) error {
	mf, err := m.Manifest()
	if err != nil {
		return err
	}
	// The columns' own tables side by side (each file is the same
	// whatever the number of threads), then the parents, which columns
	// may share, one after another.
	// The column with the most levels first: its table takes longest,
	// and the run waits for it.
	errs := make([]error, len(m.Cols))
	first := byLevels(m.Cols)
	each(len(m.Cols), m.threads, func(k int) {
		i := first[k]
		mc := &mf.Columns[i]
		mc.TableSum, errs[i] = m.saveTable(filepath.Join(dir, mc.Table), m.Cols[i], false)
	})
	for i, c := range m.Cols {
		if errs[i] != nil {
			return errs[i]
		}
		if c.Parent != nil {
			mc := &mf.Columns[i]
			var err error
			if mc.ParentSum, err = m.saveTable(filepath.Join(dir, mc.ParentTable), c, true); err != nil {
				return err
			}
		}
	}
	return writeManifest(filepath.Join(dir, ManifestName), mf)
}

// writeManifest writes the manifest mf at path, whole or not at all.
func writeManifest(path string, mf any) error {
	data, err := jsonout.Marshal(mf)
	if err != nil {
		return fmt.Errorf("tables: %w", err)
	}
	f, err := atomicfile.Create(path)
	if err != nil {
		return fmt.Errorf("tables: %w", err)
	}
	if _, err := f.Write(data); err != nil {
		f.Abort()
		return fmt.Errorf("tables: %w", err)
	}
	return f.Commit()
}

// saveTable writes the mapping table of c (of its parent levels with
// parent) at path and returns its checksum, which the manifest records.
func (m *Model) saveTable(path string, c *Col, parent bool) (string, error) {
	if err := m.saveCol(path, c, parent); err != nil {
		return "", err
	}
	sum, err := fileChecksum(path)
	if err != nil {
		return "", fmt.Errorf("tables: %w", err)
	}
	return sum, nil
}

// tableSchema returns the layout of the mapping table of c (of its
// parent levels with parent): the level and its rows, the target's
// statistics when supervised, then each encoding's own columns
// (method.Fitted.TableColumns; the parent levels' values of an encoding
// with a hierarchical prior in the parent table), then, for a column whose
// prior is another column's value, parent_row: for each level, the row of
// the parent table whose level all of its rows had, or -1 when they had
// several. A merge needs it to estimate m within parents (Stats.Parents).
// encs[i] is the range of the schema's fields that encoding i fills
// ([0, 0) for none).
func (m *Model) tableSchema(c *Col, parent bool) (s *table.Schema, encs [][2]int, err error) {
	s = &table.Schema{Fields: []table.Field{{Name: "level", Kind: table.String, Nullable: true}, {Name: "rows", Kind: table.Int64}}}
	add := func(name string, k table.Kind) { s.Fields = append(s.Fields, table.Field{Name: name, Kind: k}) }
	if c.info.Supervised {
		add("target_rows", table.Int64)
		if m.Task == colstats.Regression {
			add("target_sum", table.Float64)
			add("target_sumsq", table.Float64)
			add("target_sum_exact", table.String)
			add("target_sumsq_exact", table.String)
		} else {
			for _, cl := range m.Classes {
				add("count_"+cl, table.Int64)
			}
		}
	}
	for _, f := range c.Fits {
		from := len(s.Fields)
		var cols []table.Field
		switch pt, ok := f.(method.ParentTabler); {
		case !parent:
			cols = f.TableColumns()
		case ok:
			cols = pt.ParentTableColumns()
		}
		s.Fields = append(s.Fields, cols...)
		encs = append(encs, [2]int{from, len(s.Fields)})
	}
	if !parent && c.nest != nil && c.info.Supervised {
		add("parent_row", table.Int64)
	}
	seen := map[string]bool{}
	for _, f := range s.Fields {
		if seen[f.Name] {
			return nil, nil, fmt.Errorf("column %q: two of its encodings write the table column %q", c.Name, f.Name)
		}
		seen[f.Name] = true
	}
	return s, encs, nil
}

// parentRows returns, for a column with --prior-by column, the parent_row
// of every level slot (see tableSchema): its parent's row in the parent
// table, -1 for none or several.
func (m *Model) parentRows(c *Col) []int64 {
	p := c.Parent
	row := make([]int64, p.St.NumLevels())
	for i := range row {
		row[i] = -1
	}
	r := int64(0)
	for _, l := range p.order() {
		if p.Keep[l] || (l == 0 && m.Spec.NullsUnseen) { // as gatherLevels selects
			row[l] = r
			r++
		}
	}
	out := make([]int64, c.St.NumLevels())
	for l := range out {
		out[l] = -1
		if l < len(c.St.Parents) && c.St.Parents[l] >= 0 {
			out[l] = row[c.St.Parents[l]]
		}
	}
	return out
}

// tableRowGroup is the number of levels in a row group of a mapping table.
const tableRowGroup = 1 << 17

func (m *Model) saveCol(path string, c *Col, parent bool) error {
	defer trace.StartRegion(context.Background(), "table "+c.Name).End()
	schema, encs, err := m.tableSchema(c, parent)
	if err != nil {
		return err
	}
	var parentRow []int64
	if schema.Index("parent_row") >= 0 {
		parentRow = m.parentRows(c)
	}
	of := c // the levels the table lists
	if parent {
		of = c.Parent
	}
	// Row groups of tableRowGroup levels: the writer holds a row group's
	// pages until it is complete, and a table may have millions of levels.
	out, err := tableio.Create(path, schema, tableio.WriteOptions{Format: tableio.Parquet, Parquet: pqio.WriterOptions{RowGroupRows: tableRowGroup, KeepBytes: true}})
	if err != nil {
		return err
	}
	// The writer encodes a chunk of levels while the next is gathered.
	out.Writer = table.WriteBehind(out.Writer)
	order := of.order()
	const chunk = 1 << 16
	b := &table.Batch{Cols: make([]table.Column, len(schema.Fields))}
	var lv method.Levels
	var exact [2]table.Column
	for start := 0; start < len(order); start += chunk {
		m.gatherLevels(of, order[start:min(start+chunk, len(order))], &lv, exact[:])
		n := len(lv.Slots)
		if n == 0 {
			continue
		}
		col := &b.Cols[0]
		col.Form, col.Data, col.Offsets, col.Nulls = table.FormText, lv.Data, lv.Offsets, nil
		if lv.Slots[0] == 0 { // the null level sorts first
			col.Nulls = make([]bool, n)
			col.Nulls[0] = true
		}
		j := 1
		putInts := func(v []int64) { b.Cols[j] = table.Column{Form: table.FormInt64, Ints: v}; j++ }
		putFloats := func(v []float64) { b.Cols[j] = table.Column{Form: table.FormFloat64, Floats: v}; j++ }
		putInts(lv.Rows)
		if of.info.Supervised {
			putInts(lv.TargetRows)
			if m.Task == colstats.Regression {
				putFloats(lv.Sum)
				putFloats(lv.SumSq)
				b.Cols[j], b.Cols[j+1] = exact[0], exact[1]
				j += 2
			} else {
				for _, cnt := range lv.Counts {
					putInts(cnt)
				}
			}
		}
		for ei, f := range c.Fits {
			dst := b.Cols[encs[ei][0]:encs[ei][1]]
			switch pt, ok := f.(method.ParentTabler); {
			case !parent:
				f.FillTable(&lv, dst)
			case ok:
				pt.FillParentTable(&lv, dst)
			}
		}
		if parentRow != nil {
			pr := b.Cols[len(b.Cols)-1].ResetInts(n)
			for i, l := range lv.Slots {
				pr[i] = parentRow[l]
			}
		}
		b.Rows = n
		if err := out.Write(b); err != nil {
			out.Abort()
			return fmt.Errorf("write %s: %w", path, err)
		}
	}
	return out.Commit()
}

// gatherLevels fills lv with the levels of c among the slots rows (in
// canonical order) that its mapping table stores, and their statistics.
// The null level is stored even when nulls are treated as unseen, so that
// merged tables keep its rows in the prior. The columns are gathered one
// at a time, each by a loop that does little more than fetch one value per
// level: in canonical order the levels' statistics are scattered over
// memory, and loops this small let the processor wait for many of them at
// once. For a regression target, exact (two columns) receives each level's
// exact sums as text.
func (m *Model) gatherLevels(c *Col, rows []uint32, lv *method.Levels, exact []table.Column) {
	st := c.St
	sel := lv.Slots[:0]
	for _, l32 := range rows {
		l := int(l32)
		if c.Keep[l] || (l == 0 && m.Spec.NullsUnseen) {
			sel = append(sel, l)
		}
	}
	n := len(sel)
	lv.Slots = sel
	lv.Unkept0 = n > 0 && !c.Keep[sel[0]]
	lv.Data, lv.Offsets = st.AppendBytes(lv.Data[:0], append(lv.Offsets[:0], 0), sel)
	grow := func(v []int64) []int64 {
		if cap(v) < n {
			return make([]int64, n)
		}
		return v[:n]
	}
	growF := func(v []float64) []float64 {
		if cap(v) < n {
			return make([]float64, n)
		}
		return v[:n]
	}
	lv.Rows = grow(lv.Rows)
	if !c.info.Supervised {
		for i, l := range sel {
			lv.Rows[i] = int64(st.RowCount(l))
		}
		return
	}
	lv.TargetRows = grow(lv.TargetRows)
	if m.Task == colstats.Regression {
		// One read of each level's cells gives its exact sums, their text
		// (target_sum_exact, target_sumsq_exact) and, rounded, the
		// full-data sums the statistics hold (Seal rounds them from the
		// same exact total).
		lv.Sum, lv.SumSq = growF(lv.Sum), growF(lv.SumSq)
		for k := range exact {
			c := &exact[k]
			c.Form, c.Data, c.Offsets, c.Nulls = table.FormText, slices.Grow(c.Data[:0], 32*n), append(slices.Grow(c.Offsets[:0], n+1), 0), nil
		}
		st.ExactTargets(sel, func(i int, rows uint64, s, q *exactsum.Sum) {
			lv.TargetRows[i], lv.Sum[i], lv.SumSq[i] = int64(rows), s.Float64(), q.Float64()
			exact[0].Data = s.AppendText(exact[0].Data)
			exact[0].Offsets = append(exact[0].Offsets, int32(len(exact[0].Data)))
			exact[1].Data = q.AppendText(exact[1].Data)
			exact[1].Offsets = append(exact[1].Offsets, int32(len(exact[1].Data)))
		})
		for i, l := range sel {
			lv.Rows[i] = int64(st.RowCount(l))
		}
		return
	}
	for len(lv.Counts) < len(m.Classes) {
		lv.Counts = append(lv.Counts, nil)
	}
	lv.Counts = lv.Counts[:len(m.Classes)]
	for k := range lv.Counts {
		lv.Counts[k] = grow(lv.Counts[k])
	}
	if len(m.Classes) == 2 && st.Classes == 2 {
		// One read of each level's per-fold counts: n_c = the sum over
		// folds of the count of class c.
		st.ClassTotals2s(sel, lv.Counts[0], lv.Counts[1], lv.Rows)
		for i := range sel {
			lv.TargetRows[i] = lv.Counts[0][i] + lv.Counts[1][i]
		}
		return
	}
	for i, l := range sel {
		lv.Rows[i] = int64(st.RowCount(l))
		var all int64
		for k := range lv.Counts {
			v := int64(st.ClassCount(l, k))
			lv.Counts[k][i] = v
			all += v
		}
		lv.TargetRows[i] = all
	}
}

// CheckInput verifies that an input table has every column the model
// encodes, with the type it had when the model was fitted.
func (m *Model) CheckInput(file string, s *table.Schema, dir string) error {
	for _, pc := range m.Spec.priorColumns() {
		if s.Index(pc) < 0 {
			return &ColumnError{File: file, By: "the mapping tables in " + dir + " (prior=column:" + pc + ")", Name: pc, Have: s.Names()}
		}
	}
	for _, c := range m.Cols {
		i := s.Index(c.Name)
		if i < 0 {
			return &ColumnError{File: file, By: "the mapping tables in " + dir, Name: c.Name, Have: s.Names()}
		}
		if got := s.Fields[i].Kind; got != c.Kind {
			return &ManifestError{Dir: dir, Err: param.Errorf("column %q of %s is %s, but the tables were fitted on %s (for CSV, force it with %s %s=%s)", c.Name, file, got, c.Kind, csvio.ParamTypes, c.Name, c.Kind)}
		}
	}
	return nil
}

// supervised reports whether a column's statistics hold the target.
func (m *Model) supervised() bool {
	for _, c := range m.Cols {
		if c.info.Supervised {
			return true
		}
	}
	return false
}

// TargetSummary says what the fit decided of the target, for the command's
// summary line: the task, and for classification each class with its share
// of the rows whose target is known (the positive class of a binary target
// named as such), a class of fewer than 10 rows or under 0.1% flagged as
// perhaps a stray value. "" without a target.
func (m *Model) TargetSummary() string {
	if !m.TargetUsed() {
		return ""
	}
	s := "target " + m.Spec.Target + ": " + m.Task.String()
	classes := m.TargetClasses()
	if classes == nil {
		return s
	}
	var all int64
	for _, c := range classes {
		all += c.Rows
	}
	var parts []string
	for i := len(classes) - 1; i >= 0; i-- { // the positive class first
		c := classes[i]
		part := fmt.Sprintf("%s (%.1f%%, %d rows)", c.Class, 100*float64(c.Rows)/float64(all), c.Rows)
		if c.Stray {
			part = fmt.Sprintf("%s (%s: a stray value?)", c.Class, plural(c.Rows, "row"))
		}
		if i == m.Pos && m.Task == colstats.Binary {
			part = "positive class " + part
		}
		parts = append(parts, part)
	}
	if m.Task == colstats.Multiclass {
		s += fmt.Sprintf(", %d classes", len(m.Classes))
	}
	return s + ", " + strings.Join(parts, ", ")
}
