package pipeline

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"runtime/trace"
	"strconv"
	"strings"

	"manyfold/encoders/colstats"
	"manyfold/encoders/hashenc"
	"manyfold/io/atomicfile"
	"manyfold/io/pqio"
	"manyfold/io/table"
	"manyfold/io/tableio"
)

// FormatVersion is the version of the mapping-table layout. Tables of
// another version are refused with a message to refit them. 2: the
// manifest records each table's checksum and the target's origin, and a
// table of a column with a column prior has parent_row.
const FormatVersion = 2

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

// Params records every parameter of the fit.
type Params struct {
	Methods      []string `json:"methods"`
	Folds        int      `json:"folds"`
	FoldBy       string   `json:"fold_by"`
	Seed         uint64   `json:"seed"`
	Scheme       string   `json:"scheme"`
	Smoothing    string   `json:"smoothing"`
	PriorPrefix  int      `json:"prior_prefix,omitempty"`
	PriorColumn  string   `json:"prior_column,omitempty"`
	Output       string   `json:"output"`
	Freq         string   `json:"freq"`
	TopK         int      `json:"top_k"`
	MinCount     uint64   `json:"min_count"`
	Buckets      uint64   `json:"buckets"`
	HashSeed     uint64   `json:"hash_seed"`
	Signed       bool     `json:"signed"`
	MinLevelRows uint64   `json:"min_level_rows"`
	Nulls        string   `json:"nulls"`
}

// ManifestCol describes one encoded column's table.
type ManifestCol struct {
	Name        string     `json:"name"`
	Type        string     `json:"type"`
	Table       string     `json:"table"`
	ParentTable string     `json:"parent_table,omitempty"`
	TableSum    string     `json:"table_xxh64"`                  // xxh64 of the table file, 16 hexadecimal digits
	ParentSum   string     `json:"parent_table_xxh64,omitempty"` // and of the parent table
	Levels      int        `json:"levels"`
	Stored      int        `json:"levels_stored"`
	Prior       []*float64 `json:"prior,omitempty"`
	M           []*float64 `json:"m,omitempty"`
	ParentPrior []*float64 `json:"parent_prior,omitempty"`
	ParentM     []*float64 `json:"parent_m,omitempty"`
	// Hashing: for the levels seen, the expected number of occupied buckets
	// B*(1-(1-1/B)^n) and the chance that a level shares its bucket
	// 1-(1-1/B)^(n-1) (standard occupancy results).
	HashOccupied float64 `json:"hash_expected_occupied,omitempty"`
	HashShared   float64 `json:"hash_expected_shared,omitempty"`
}

// ManifestError reports mapping tables that cannot serve the input.
type ManifestError struct {
	Dir string
	Msg string
}

func (e *ManifestError) Error() string { return e.Dir + ": " + e.Msg }

func smoothingString(s colstats.Smoothing) string {
	switch s.Kind {
	case "m":
		return "m=" + strconv.FormatFloat(s.M, 'g', -1, 64)
	case "blend":
		return "blend=" + strconv.FormatFloat(s.K, 'g', -1, 64) + "," + strconv.FormatFloat(s.F, 'g', -1, 64)
	}
	return "auto"
}

func optFloat(v float64) *float64 {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return nil
	}
	return &v
}

func fromOpt(p *float64) float64 {
	if p == nil {
		return math.Inf(1)
	}
	return *p
}

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
func (m *Model) Manifest() Manifest {
	sp := &m.Spec
	mf := Manifest{Format: FormatVersion, Tool: Version, Rows: m.Rows, Missing: m.Missing, Target: sp.Target, Origin: m.Origin}
	for _, f := range m.Input {
		mf.Input = append(mf.Input, ManifestField{Name: f.Name, Type: f.Kind.String()})
	}
	if m.Cols[0].Full != nil {
		mf.Task = m.Task.String()
		mf.Classes = m.Classes
	} else {
		mf.Target = ""
	}
	freq, nulls := "count", "level"
	if sp.FreqShare {
		freq = "share"
	}
	if sp.NullsUnseen {
		nulls = "unseen"
	}
	mf.Params = Params{Methods: sp.Methods, Folds: sp.Folds, FoldBy: sp.FoldBy, Seed: sp.Seed, Scheme: sp.Scheme,
		Smoothing: smoothingString(sp.Smoothing), PriorPrefix: sp.PriorPrefix, PriorColumn: sp.PriorColumn, Output: sp.Output, Freq: freq,
		TopK: sp.TopK, MinCount: sp.MinCount, Buckets: sp.Buckets, HashSeed: sp.HashSeed, Signed: sp.Signed,
		MinLevelRows: sp.MinLevelRows, Nulls: nulls}
	for i, c := range m.Cols {
		mc := ManifestCol{Name: c.Name, Type: c.Kind.String(), Table: tableFile(i, c.Name), Levels: m.Levels(i)}
		for l := range c.Keep {
			if c.Keep[l] {
				mc.Stored++
			}
		}
		for _, ft := range c.Full {
			mc.Prior = append(mc.Prior, optFloat(ft.Prior))
			mc.M = append(mc.M, optFloat(ft.M))
		}
		if c.Parent != nil {
			mc.ParentTable = strings.TrimSuffix(mc.Table, ".parquet") + ".parents.parquet"
			for _, ft := range c.Parent.Full {
				mc.ParentPrior = append(mc.ParentPrior, optFloat(ft.Prior))
				mc.ParentM = append(mc.ParentM, optFloat(ft.M))
			}
		}
		n, b := float64(mc.Levels), float64(sp.Buckets)
		mc.HashOccupied = hashenc.ExpectedOccupied(n, b)
		mc.HashShared = hashenc.SharedChance(n, b)
		mf.Columns = append(mf.Columns, mc)
	}
	return mf
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
	mf := m.Manifest()
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
		mc.TableSum, errs[i] = m.saveTable(filepath.Join(dir, mc.Table), m.Cols[i])
	})
	for i, c := range m.Cols {
		if errs[i] != nil {
			return errs[i]
		}
		if c.Parent != nil {
			mc := &mf.Columns[i]
			var err error
			if mc.ParentSum, err = m.saveTable(filepath.Join(dir, mc.ParentTable), c.Parent); err != nil {
				return err
			}
		}
	}
	data, err := json.MarshalIndent(mf, "", "  ")
	if err != nil {
		return err
	}
	f, err := atomicfile.Create(filepath.Join(dir, ManifestName))
	if err != nil {
		return err
	}
	if _, err := f.Write(append(data, '\n')); err != nil {
		f.Abort()
		return err
	}
	return f.Commit()
}

// saveTable writes the mapping table of c at path and returns its
// checksum, which the manifest records.
func (m *Model) saveTable(path string, c *Col) (string, error) {
	if err := m.saveCol(path, c); err != nil {
		return "", err
	}
	sum, err := fileChecksum(path)
	if err != nil {
		return "", fmt.Errorf("tables: %w", err)
	}
	return sum, nil
}

// tableSchema returns the layout of a column's mapping table.
//
// nested adds parent_row, in the table of a column whose prior is another
// column's value (--prior-by column): for each level, the row of the parent
// table whose level all of its rows had, or -1 when they had several. A
// merge needs it to estimate m within parents (Stats.Parents).
func (m *Model) tableSchema(supervised, nested bool) *table.Schema {
	s := &table.Schema{Fields: []table.Field{{Name: "level", Kind: table.String, Nullable: true}, {Name: "rows", Kind: table.Int64}}}
	add := func(name string, k table.Kind) { s.Fields = append(s.Fields, table.Field{Name: name, Kind: k}) }
	if supervised {
		add("target_rows", table.Int64)
		if m.Task == colstats.Regression {
			add("target_sum", table.Float64)
			add("target_sumsq", table.Float64)
			add("tmean", table.Float64)
		} else {
			for _, cl := range m.Classes {
				add("count_"+cl, table.Int64)
			}
			if m.Task == colstats.Binary {
				add("tmean", table.Float64)
			} else {
				for _, cl := range m.Classes {
					add("tmean_"+cl, table.Float64)
				}
			}
		}
	}
	add("freq", table.Float64)
	add("topk", table.Int64)
	add("bucket", table.Int64)
	if nested {
		add("parent_row", table.Int64)
	}
	return s
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
		if p.Keep[l] || (l == 0 && m.Spec.NullsUnseen) { // as saveCol selects
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

func (m *Model) saveCol(path string, c *Col) error {
	defer trace.StartRegion(context.Background(), "table "+c.Name).End()
	supervised := c.Full != nil
	nested := supervised && m.Spec.PriorColumn != "" && c.Parent != nil
	schema := m.tableSchema(supervised, nested)
	var parentRow []int64
	if nested {
		parentRow = m.parentRows(c)
	}
	// Row groups of tableRowGroup levels: the writer holds a row group's
	// pages until it is complete, and a table may have millions of levels.
	out, err := tableio.Create(path, schema, tableio.WriteOptions{Format: tableio.Parquet, Parquet: pqio.WriterOptions{RowGroupRows: tableRowGroup, KeepBytes: true}})
	if err != nil {
		return err
	}
	// The writer encodes a chunk of levels while the next is gathered.
	out.Writer = table.WriteBehind(out.Writer)
	st := c.St
	order := c.order()
	const chunk = 1 << 16
	b := &table.Batch{Cols: make([]table.Column, len(schema.Fields))}
	for start := 0; start < len(order); start += chunk {
		rows := order[start:min(start+chunk, len(order))]
		var sel []int
		for _, l32 := range rows {
			l := int(l32)
			// The null level is stored even when nulls are treated as
			// unseen, so that merged tables keep its rows in the prior.
			if c.Keep[l] || (l == 0 && m.Spec.NullsUnseen) {
				sel = append(sel, l)
			}
		}
		n := len(sel)
		// Every level of sel is kept but the null level, when stored
		// though unseen: the loops below need not read Keep again.
		unkept0 := n > 0 && !c.Keep[sel[0]]
		lv := &b.Cols[0]
		lv.Form, lv.Data, lv.Offsets, lv.Nulls = table.FormText, lv.Data[:0], append(lv.Offsets[:0], 0), nil
		if len(sel) > 0 && sel[0] == 0 { // the null level sorts first
			lv.Nulls = make([]bool, n)
			lv.Nulls[0] = true
		}
		lv.Data, lv.Offsets = st.AppendBytes(lv.Data, lv.Offsets, sel)
		// The columns are filled one at a time, each by a loop that does
		// little more than fetch one value per level: in canonical order the
		// levels' statistics are scattered over memory, and loops this small
		// let the processor wait for many of them at once.
		cols := b.Cols[1:]
		for j, f := range schema.Fields[1:] {
			if f.Kind == table.Int64 {
				ints(&cols[j], n)
			} else {
				floats(&cols[j], n)
			}
		}
		j := 0
		rowsCol := cols[j].Ints
		j++
		fast := supervised && m.fastTableValues(c)
		if !fast {
			for i, l := range sel {
				rowsCol[i] = int64(st.RowCount(l))
			}
		}
		if supervised {
			if fast {
				m.binaryTableValues(c, sel, unkept0, rowsCol, cols[j].Ints, cols[j+1].Ints, cols[j+2].Ints, cols[j+3].Floats)
				j += 4
			} else {
				for i, l := range sel {
					k := j
					putI := func(v int64) { cols[k].Ints[i] = v; k++ }
					putF := func(v float64) { cols[k].Floats[i] = v; k++ }
					a := st.Target(l, 0, -1, m.Pos)
					putI(int64(a.N))
					if m.Task == colstats.Regression {
						putF(a.Sum)
						putF(a.SumSq)
					} else {
						for cl := range m.Classes {
							putI(int64(st.ClassCount(l, cl)))
						}
					}
					for o := range c.Full {
						putF(m.tmean(c, o, l))
					}
				}
				j++ // target_rows
				if m.Task == colstats.Regression {
					j += 2
				} else {
					j += len(m.Classes)
				}
				j += len(c.Full)
			}
		}
		freqCol := cols[j].Floats
		j++
		for i, l := range sel {
			switch {
			case c.Freq != nil:
				freqCol[i] = c.Freq[l]
			case i == 0 && unkept0:
				freqCol[i] = 0
			default:
				// The rows were fetched above.
				freqCol[i] = m.freqOf(c, uint64(rowsCol[i]))
			}
		}
		topCol := cols[j].Ints
		j++
		for i, l := range sel {
			topCol[i] = int64(c.topCode(l))
		}
		// The level bytes were copied above, in order: hash them there.
		bucketCol := cols[j].Ints
		for i := range sel {
			v := lv.Data[lv.Offsets[i]:lv.Offsets[i+1]]
			bucketCol[i] = int64(hashenc.Bucket(hashenc.Sum(v, m.Spec.HashSeed), m.Spec.Buckets))
		}
		if nested {
			pr := cols[j+1].Ints
			for i, l := range sel {
				pr[i] = parentRow[l]
			}
		}
		b.Rows = n
		if n == 0 {
			continue
		}
		if err := out.Write(b); err != nil {
			out.Abort()
			return fmt.Errorf("write %s: %w", path, err)
		}
	}
	return out.Commit()
}

// fastTableValues reports whether binaryTableValues computes the
// supervised table columns of c: a binary target, no hierarchical prior,
// and values computed from the statistics (not loaded).
func (m *Model) fastTableValues(c *Col) bool {
	return m.Task == colstats.Binary && len(m.Classes) == 2 && c.St.Classes == 2 && c.Parent == nil && c.TMean == nil && len(c.Full) == 1
}

// binaryTableValues fills, for the slots sel of a binary-target column,
// rows (all, whatever the target), target_rows, count_<class> of the two
// classes and tmean, from one read of each level's per-fold counts: n_c = sum over folds of the count of
// class c, target_rows = n_0 + n_1, tmean = Full.Encode(n_0+n_1, n_pos) for
// a kept level and the prior otherwise (what Target, ClassCount and tmean
// give, with the same integer sums). Every level of sel is kept but sel[0]
// when unkept0.
func (m *Model) binaryTableValues(c *Col, sel []int, unkept0 bool, all, rows, c0, c1 []int64, tmean []float64) {
	st := c.St
	st.ClassTotals2s(sel, c0, c1, all)
	for i := range sel {
		rows[i] = c0[i] + c1[i]
	}
	ft := &c.Full[0]
	for i := range sel {
		if i == 0 && unkept0 {
			tmean[i] = ft.Prior
			continue
		}
		k := c0[i]
		if m.Pos == 1 {
			k = c1[i]
		}
		tmean[i] = ft.Encode(colstats.Agg{N: float64(rows[i]), Sum: float64(k), SumSq: float64(k)})
	}
}

// CheckInput verifies that an input table has every column the model
// encodes, with the type it had when the model was fitted.
func (m *Model) CheckInput(file string, s *table.Schema, dir string) error {
	if pc := m.Spec.PriorColumn; pc != "" && s.Index(pc) < 0 {
		return &ColumnError{File: file, Flag: "the mapping tables in " + dir + " (--prior-by column)", Name: pc, Have: s.Names()}
	}
	for _, c := range m.Cols {
		i := s.Index(c.Name)
		if i < 0 {
			return &ColumnError{File: file, Flag: "the mapping tables in " + dir, Name: c.Name, Have: s.Names()}
		}
		if got := s.Fields[i].Kind; got != c.Kind {
			return &ManifestError{Dir: dir, Msg: fmt.Sprintf("column %q of %s is %s, but the tables were fitted on %s (for CSV, force it with --type %s=%s)", c.Name, file, got, c.Kind, c.Name, c.Kind)}
		}
	}
	return nil
}
