package pipeline

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"

	"github.com/cespare/xxhash/v2"

	"manyfold/encoders/colstats"
	"manyfold/encoders/exactsum"
	"manyfold/encoders/method"
	"manyfold/folds"
	"manyfold/internal/strictjson"
	"manyfold/io/pqio"
	"manyfold/io/table"
)

// maxManifestBytes bounds the manifest the loader reads into memory: a
// manifest of a thousand multi-class columns takes a few megabytes.
const maxManifestBytes = 64 << 20

// LoadTables reads a tables directory written by SaveTables into a model
// that encodes new rows (NewRows) and merges with others.
//
// Nothing in the directory is trusted: the manifest must hold every field
// SaveTables writes, each within its domain and consistent with the others;
// a table must be a regular file named by a plain file name in dir (no
// path, no symbolic link), with the checksum the manifest records, the
// columns and types the fit implies and values within their domains. Any
// other directory gives a ManifestError naming the field or file.
//
// LoadTables keeps a regression target's exact sums (the tables'
// target_sum_exact and target_sumsq_exact, each checked against its
// rounded value), which Merge needs to add them bit for bit; tables
// written before they existed give their rounded sums, added as if exact.
func LoadTables(dir string) (*Model, error) {
	mf, err := readManifest(dir)
	if err != nil {
		return nil, err
	}
	return loadChecked(dir, mf, true)
}

// LoadTablesManifest is LoadTables for apply: it returns the manifest it
// read and checked too (what a model does not keep, such as each column's
// TrainingScore), and keeps only the rounded sums of a regression target
// (a table's exact sums are checked for their type, not read).
func LoadTablesManifest(dir string) (*Model, *Manifest, error) {
	mf, err := readManifest(dir)
	if err != nil {
		return nil, nil, err
	}
	m, err := loadChecked(dir, mf, false)
	if err != nil {
		return nil, nil, err
	}
	return m, mf, nil
}

// loadChecked checks the manifest mf of dir and loads the tables it lists,
// with a regression target's exact sums if exact.
func loadChecked(dir string, mf *Manifest, exact bool) (*Model, error) {
	sp, err := mf.check()
	if err != nil {
		return nil, &ManifestError{Dir: dir, Msg: ManifestName + ": " + err.Error()}
	}
	m := &Model{Spec: sp, Classes: mf.Classes, Rows: mf.Rows, Missing: mf.Missing, Origin: mf.Origin, exact: exact}
	if math.IsNaN(m.Origin) || math.IsInf(m.Origin, 0) || (m.Origin != 0 && mf.Task != colstats.Regression.String()) {
		return nil, &ManifestError{Dir: dir, Msg: ManifestName + fmt.Sprintf(": target_origin %g: want a finite number, and 0 unless the task is regression", m.Origin)}
	}
	for _, f := range mf.Input {
		k, _ := table.ParseKind(f.Type) // checked
		m.Input = append(m.Input, table.Field{Name: f.Name, Kind: k})
	}
	supervised := mf.Task != ""
	if supervised {
		m.Task, _ = colstats.ParseTask(mf.Task) // checked
		m.Pos = len(m.Classes) - 1
	}
	for i, mc := range mf.Columns {
		c, err := m.loadColumn(dir, i, &mc, supervised)
		if err != nil {
			return nil, err
		}
		m.Cols = append(m.Cols, c)
	}
	return m, nil
}

// loadColumn reads the tables of column i: its encodings from the manifest,
// then its table and its parent levels' table, each value checked.
func (m *Model) loadColumn(dir string, i int, mc *ManifestCol, supervised bool) (*Col, error) {
	k, _ := table.ParseKind(mc.Type) // checked
	supervised = supervised && m.Spec.columnSupervised(i)
	c := m.newLoaded(mc.Name, k, supervised)
	if mc.ParentTable != "" {
		c.Parent = m.newLoaded(mc.Name+" parents", table.String, supervised)
		if m.Spec.prior(i).Column != "" {
			c.nest = []int32{}
		}
	}
	if c.Parent != nil {
		m.setInfo(c.Parent, nil)
	}
	m.setInfo(c, c.Parent)
	for ei, e := range m.Spec.EncodingsOf(i) {
		f, err := e.Load(c.info, mc.Encodings[ei].Fit)
		if err != nil {
			return nil, &ManifestError{Dir: dir, Msg: fmt.Sprintf("%s: columns[%d].encodings[%d].fit: %v", ManifestName, i, ei, err)}
		}
		c.Fits = append(c.Fits, f)
	}
	if err := m.loadTable(dir, mc.Table, mc.TableSum, c, false, mc.Stored); err != nil {
		return nil, err
	}
	if p := c.Parent; p != nil {
		if err := m.loadTable(dir, mc.ParentTable, mc.ParentSum, c, true, -1); err != nil {
			return nil, err
		}
		if m.Spec.prior(i).Prefix > 0 {
			c.ParentOf = make([]int32, c.St.NumLevels())
			for l := range c.ParentOf {
				c.ParentOf[l] = -1
				if l > 0 {
					b := c.St.Bytes(l)
					c.ParentOf[l] = int32(p.St.Lookup(b[:min(len(b), m.Spec.prior(i).Prefix)]))
				}
			}
			c.info.ParentOf = c.ParentOf
		}
		if c.nest != nil { // parent rows to the parent's slots
			for l, r := range c.nest {
				if int(r) >= len(p.rowSlots) {
					return nil, &ManifestError{Dir: filepath.Join(dir, mc.Table), Msg: fmt.Sprintf("parent_row %d: the parent table has %d rows", r, len(p.rowSlots))}
				}
				if r >= 0 {
					c.nest[l] = p.rowSlots[r]
				}
			}
			c.St.Parents = c.nest
		}
	}
	for _, f := range c.Fits {
		if err := f.Finish(); err != nil {
			return nil, &ManifestError{Dir: filepath.Join(dir, mc.Table), Msg: err.Error()}
		}
	}
	return c, nil
}

// newLoaded returns an empty column of a loaded model: statistics of one
// fold, no level seen.
func (m *Model) newLoaded(name string, k table.Kind, supervised bool) *Col {
	task := m.Task
	if !supervised {
		task = colstats.Binary
	}
	classes := len(m.Classes)
	if !supervised {
		classes = 0
	}
	st := colstats.New(task, 1, classes, 1024)
	st.Origin = m.Origin
	return &Col{Name: name, Kind: k, St: st, Keep: []bool{false}, supervised: supervised}
}

// readManifest reads and decodes the manifest of dir: a regular file of at
// most maxManifestBytes, of this format and tool version, holding every
// field that SaveTables always writes and no other.
func readManifest(dir string) (*Manifest, error) {
	path := filepath.Join(dir, ManifestName)
	f, _, err := openRegular(path, maxManifestBytes)
	if err != nil {
		if errors.Is(err, os.ErrNotExist) {
			return nil, &ManifestError{Dir: dir, Msg: "no " + ManifestName + " here; is this a tables directory written by manyfold encode?"}
		}
		return nil, &ManifestError{Dir: dir, Msg: ManifestName + ": " + err.Error()}
	}
	data, err := io.ReadAll(io.LimitReader(f, maxManifestBytes+1))
	f.Close()
	if err != nil {
		return nil, &ManifestError{Dir: dir, Msg: fmt.Sprintf("read %s: %v", ManifestName, err)}
	}
	bad := func(format string, a ...any) error {
		return &ManifestError{Dir: dir, Msg: ManifestName + ": " + fmt.Sprintf(format, a...)}
	}
	// The versions first: another version's manifest may have other fields.
	var head struct {
		Format int    `json:"format"`
		Tool   string `json:"tool"`
	}
	if err := json.Unmarshal(data, &head); err != nil {
		return nil, bad("not valid JSON: %v", err)
	}
	if head.Format != FormatVersion {
		return nil, &ManifestError{Dir: dir, Msg: fmt.Sprintf("mapping tables of format version %d; this manyfold reads version %d: refit them with manyfold encode", head.Format, FormatVersion)}
	}
	if head.Tool != Version {
		return nil, &ManifestError{Dir: dir, Msg: fmt.Sprintf("mapping tables written by manyfold %s; this is manyfold %s: refit them with this version", head.Tool, Version)}
	}
	var mf Manifest
	if err := strictjson.Decode(data, &mf); err != nil {
		return nil, bad("%v", err)
	}
	return &mf, nil
}

// check verifies every field of the manifest against its domain and the
// others, and returns the job it describes. Errors name the field.
func (mf *Manifest) check() (Spec, error) {
	kinds, err := mf.checkInput()
	if err != nil {
		return Spec{}, err
	}
	task, err := mf.checkTarget(kinds)
	if err != nil {
		return Spec{}, err
	}
	sp, err := mf.checkParams(kinds)
	if err != nil {
		return Spec{}, err
	}
	supervised := mf.Task != ""
	for i := range mf.Columns {
		if err := mf.checkColumn(i, kinds, task, supervised, &sp); err != nil {
			return Spec{}, err
		}
	}
	return sp, nil
}

// checkInput checks the input columns and returns their kinds by name.
func (mf *Manifest) checkInput() (map[string]table.Kind, error) {
	if len(mf.Input) == 0 {
		return nil, errors.New("input lists no columns")
	}
	kinds := make(map[string]table.Kind, len(mf.Input))
	for i, f := range mf.Input {
		k, err := table.ParseKind(f.Type)
		if err != nil {
			return nil, fmt.Errorf("input[%d].type: %v", i, err)
		}
		if _, dup := kinds[f.Name]; dup {
			return nil, fmt.Errorf("input[%d].name: column %q is named twice", i, f.Name)
		}
		kinds[f.Name] = k
	}
	return kinds, nil
}

// checkTarget checks the target, task, classes and row counts.
func (mf *Manifest) checkTarget(kinds map[string]table.Kind) (colstats.Task, error) {
	if mf.Rows < 1 {
		return 0, fmt.Errorf("rows is %d; a fit reads at least one row", mf.Rows)
	}
	if mf.Missing < 0 || mf.Missing >= mf.Rows {
		return 0, fmt.Errorf("target_missing is %d; want 0 to rows-1 (%d)", mf.Missing, mf.Rows-1)
	}
	if mf.Task == "" {
		switch {
		case mf.Target != "":
			return 0, fmt.Errorf("target %q without a task", mf.Target)
		case len(mf.Classes) > 0:
			return 0, errors.New("classes without a task")
		case mf.Missing != 0:
			return 0, errors.New("target_missing without a task")
		}
		return 0, nil
	}
	task, err := colstats.ParseTask(mf.Task)
	if err != nil {
		return 0, fmt.Errorf("task: %v", err)
	}
	if mf.Target == "" {
		return 0, fmt.Errorf("task is %q but target is empty", mf.Task)
	}
	if _, ok := kinds[mf.Target]; !ok {
		return 0, fmt.Errorf("target %q is not among the input columns", mf.Target)
	}
	n := len(mf.Classes)
	switch {
	case task == colstats.Regression && n != 0:
		return 0, fmt.Errorf("classes lists %d classes for a regression target", n)
	case task == colstats.Binary && n != 2:
		return 0, fmt.Errorf("classes lists %d classes for a binary target; want 2", n)
	case task == colstats.Multiclass && (n < 3 || n > MaxClasses):
		return 0, fmt.Errorf("classes lists %d classes for a multi-class target; want 3 to %d", n, MaxClasses)
	}
	seen := make(map[string]bool, n)
	for _, c := range mf.Classes {
		if seen[c] {
			return 0, fmt.Errorf("classes names %q twice", c)
		}
		seen[c] = true
	}
	return task, nil
}

// checkParams checks the parameters and the columns' encodings and
// returns the job they describe.
func (mf *Manifest) checkParams(kinds map[string]table.Kind) (Spec, error) {
	p := &mf.Params
	if p.Nulls != "level" && p.Nulls != "unseen" {
		return Spec{}, fmt.Errorf("params.nulls %q: want level or unseen", p.Nulls)
	}
	sp, err := specFrom(mf)
	if err != nil {
		return Spec{}, err
	}
	if err := sp.Validate(); err != nil {
		return Spec{}, fmt.Errorf("params: %v", err)
	}
	if mf.Task == "" && sp.FoldBy.Needs().Class {
		return Spec{}, fmt.Errorf("params.fold_by is %s but task is empty", sp.FoldBy)
	}
	if mf.Task == "" && sp.supervised() {
		return Spec{}, errors.New("an encoding reads the target but task is empty")
	}
	if mf.Task != "" && !sp.supervised() && !sp.FoldBy.Needs().Class {
		return Spec{}, fmt.Errorf("task %q but no encoding reads the target and the folds are not stratified", mf.Task)
	}
	for _, c := range sp.priorColumns() {
		if _, ok := kinds[c]; !ok {
			return Spec{}, fmt.Errorf("prior=column:%s: %q is not among the input columns", c, c)
		}
	}
	return sp, nil
}

// checkColumn checks columns[i]: its name, type, level counts, table and
// parent table.
func (mf *Manifest) checkColumn(i int, kinds map[string]table.Kind, task colstats.Task, supervised bool, sp *Spec) error {
	c := &mf.Columns[i]
	at := fmt.Sprintf("columns[%d]", i)
	k, err := table.ParseKind(c.Type)
	if err != nil {
		return fmt.Errorf("%s.type: %v", at, err)
	}
	ik, ok := kinds[c.Name]
	switch {
	case !ok:
		return fmt.Errorf("%s.name %q is not among the input columns", at, c.Name)
	case ik != k:
		return fmt.Errorf("%s.type is %s but input column %q is %s", at, k, c.Name, ik)
	case c.Name == mf.Target:
		return fmt.Errorf("%s.name %q is the target", at, c.Name)
	case c.Levels < 1:
		return fmt.Errorf("%s.levels is %d; a fitted column has at least one level", at, c.Levels)
	case c.Stored < 0 || c.Stored > c.Levels:
		return fmt.Errorf("%s.levels_stored is %d; want 0 to levels (%d)", at, c.Stored, c.Levels)
	}
	if err := checkTableName(at+".table", c.Table, tableFile(i, c.Name)); err != nil {
		return err
	}
	if err := checkSum(at+".table_xxh64", c.TableSum); err != nil {
		return err
	}
	if err := mf.checkScore(i, task, supervised, sp); err != nil {
		return err
	}
	if supervised {
		for ei, e := range sp.EncodingsOf(i) {
			if err := e.Check(task, len(mf.Classes)); err != nil {
				return fmt.Errorf("%s.encodings[%d]: %v", at, ei, err)
			}
		}
	}
	if !supervised || sp.prior(i).None() {
		if c.ParentTable != "" || c.ParentSum != "" {
			return fmt.Errorf("%s.parent_table %q, but the column has no hierarchical prior", at, c.ParentTable)
		}
		return nil
	}
	if c.ParentTable == "" {
		return fmt.Errorf("%s.parent_table is missing; the column has a hierarchical prior", at)
	}
	if err := checkTableName(at+".parent_table", c.ParentTable, strings.TrimSuffix(c.Table, ".parquet")+".parents.parquet"); err != nil {
		return err
	}
	return checkSum(at+".parent_table_xxh64", c.ParentSum)
}

// checkScore checks columns[i].training_score: recorded only for a column
// with a target encoding of a binary or regression target, an AUC within
// [0, 1] or an RMSE of at least 0, finite.
func (mf *Manifest) checkScore(i int, task colstats.Task, supervised bool, sp *Spec) error {
	v := mf.Columns[i].TrainingScore
	if v == nil {
		return nil
	}
	at := fmt.Sprintf("columns[%d].training_score %g", i, *v)
	target := false
	for _, e := range sp.EncodingsOf(i) {
		target = target || e.Method().Name() == "target"
	}
	switch metric := metricOf(task); {
	case !supervised || !target || metric == "":
		return fmt.Errorf("%s, but the column has no target encoding of a binary or regression target", at)
	case metric == MetricAUC && !(*v >= 0 && *v <= 1):
		return fmt.Errorf("%s: want an AUC within [0, 1]", at)
	case metric == MetricRMSE && !(*v >= 0 && !math.IsInf(*v, 0)):
		return fmt.Errorf("%s: want an RMSE of at least 0, finite", at)
	}
	return nil
}

// checkTableName checks that the table named at field is a plain file name
// and the one SaveTables gives it.
func checkTableName(field, name, want string) error {
	if name == "" || name != filepath.Base(name) || !filepath.IsLocal(name) || strings.ContainsAny(name, "/\\\x00") {
		return fmt.Errorf("%s %q is not a plain file name in the tables directory", field, name)
	}
	if name != want {
		return fmt.Errorf("%s %q is not this column's table (%s)", field, name, want)
	}
	return nil
}

// checkSum checks the form of a table's checksum.
func checkSum(field, s string) error {
	if s == "" {
		return fmt.Errorf("%s is missing", field)
	}
	if _, err := strconv.ParseUint(s, 16, 64); err != nil || len(s) != 16 {
		return fmt.Errorf("%s %q: want 16 hexadecimal digits", field, s)
	}
	return nil
}

// specFrom returns the job the manifest's parameters and the columns'
// encodings describe.
func specFrom(mf *Manifest) (Spec, error) {
	p := mf.Params
	scheme, ok := method.ParseScheme(p.Scheme)
	if !ok {
		return Spec{}, fmt.Errorf("params.scheme %q: want kfold, loo, ordered or none", p.Scheme)
	}
	rule, err := folds.ParseRule(p.FoldBy)
	if err != nil {
		return Spec{}, fmt.Errorf("params.fold_by: %v", err)
	}
	sp := Spec{Target: mf.Target, Task: mf.Task, Folds: p.Folds, FoldBy: rule, Seed: p.Seed,
		Scheme: scheme, MinLevelRows: p.MinLevelRows, NullsUnseen: p.Nulls == "unseen", KeepAll: true}
	sp.Encodings.PerColumn = []method.ColumnEncodings{}
	for i, c := range mf.Columns {
		if len(c.Encodings) == 0 {
			return Spec{}, fmt.Errorf("columns[%d].encodings is empty", i)
		}
		var encs []method.Encoding
		for ei, me := range c.Encodings {
			e, err := method.Parse(me.Encoding)
			if err != nil {
				return Spec{}, fmt.Errorf("columns[%d].encodings[%d]: %v", i, ei, err)
			}
			if e.String() != me.Encoding {
				return Spec{}, fmt.Errorf("columns[%d].encodings[%d]: %q is not written as manyfold writes it (%q)", i, ei, me.Encoding, e.String())
			}
			for _, d := range encs {
				if d.Method() == e.Method() {
					return Spec{}, fmt.Errorf("columns[%d].encodings lists %s twice (%s, %s)", i, e.Method().Name(), d, e)
				}
			}
			encs = append(encs, e)
		}
		sp.Columns = append(sp.Columns, c.Name)
		sp.Encodings.PerColumn = append(sp.Encodings.PerColumn, method.ColumnEncodings{Column: c.Name, Encodings: encs})
	}
	return sp, nil
}

// openRegular opens path for reading if it is a regular file, not a
// symbolic link, of at most max bytes (max 0: any size), and returns it
// with its size. A FIFO or device is refused without being opened for
// reading, so it cannot make the caller wait.
func openRegular(path string, max int64) (*os.File, int64, error) {
	fi, err := os.Lstat(path)
	if err != nil {
		return nil, 0, err
	}
	if !fi.Mode().IsRegular() {
		return nil, 0, fmt.Errorf("not a regular file but %s", describeMode(fi.Mode()))
	}
	f, err := openNoFollow(path)
	if err != nil {
		return nil, 0, err
	}
	st, err := f.Stat()
	if err != nil {
		f.Close()
		return nil, 0, err
	}
	if !st.Mode().IsRegular() || !os.SameFile(fi, st) {
		f.Close()
		return nil, 0, errors.New("not a regular file: it changed while it was opened")
	}
	if max > 0 && st.Size() > max {
		f.Close()
		return nil, 0, fmt.Errorf("%d bytes, more than the %d allowed", st.Size(), max)
	}
	return f, st.Size(), nil
}

// describeMode names the kind of file of a mode that is not regular.
func describeMode(m os.FileMode) string {
	switch {
	case m&os.ModeSymlink != 0:
		return "a symbolic link"
	case m.IsDir():
		return "a directory"
	case m&os.ModeNamedPipe != 0:
		return "a named pipe"
	case m&os.ModeSocket != 0:
		return "a socket"
	case m&os.ModeDevice != 0:
		return "a device"
	}
	return "a special file"
}

// fileChecksum returns the xxh64 checksum of the file at path, as 16
// hexadecimal digits.
func fileChecksum(path string) (string, error) {
	f, err := os.Open(path)
	if err != nil {
		return "", err
	}
	defer f.Close()
	return readerChecksum(f)
}

func readerChecksum(r io.Reader) (string, error) {
	h := xxhash.New()
	if _, err := io.Copy(h, r); err != nil {
		return "", err
	}
	return fmt.Sprintf("%016x", h.Sum64()), nil
}

// openTable opens the table name of dir, a regular file whose checksum is
// sum, as Parquet. Errors are ManifestErrors naming the file.
func openTable(dir, name, sum string) (*pqio.Reader, error) {
	path := filepath.Join(dir, name)
	bad := func(format string, a ...any) error {
		return &ManifestError{Dir: path, Msg: fmt.Sprintf(format, a...)}
	}
	f, size, err := openRegular(path, 0)
	if err != nil {
		if errors.Is(err, os.ErrNotExist) {
			return nil, bad("the table is missing")
		}
		return nil, bad("%v", err)
	}
	got, err := readerChecksum(io.NewSectionReader(f, 0, size))
	if err != nil {
		f.Close()
		return nil, bad("read: %v", err)
	}
	if got != sum {
		f.Close()
		return nil, bad("checksum xxh64 %s, but the manifest records %s: the table was changed or replaced", got, sum)
	}
	var magic [4]byte
	if _, err := f.ReadAt(magic[:], 0); err != nil || string(magic[:]) != "PAR1" {
		f.Close()
		return nil, bad("not a Parquet file")
	}
	r, err := pqio.OpenFile(f, path)
	if err != nil {
		f.Close()
		return nil, bad("%v", err)
	}
	return r, nil
}

// loadTable reads the mapping table name of column c (of its parent
// levels with parent) into its statistics and its encodings. stored is the
// number of levels the manifest says the table keeps (-1 for a parent
// table, which the manifest does not count).
func (m *Model) loadTable(dir, name, sum string, c *Col, parent bool, stored int) error {
	r, err := openTable(dir, name, sum)
	if err != nil {
		return err
	}
	defer r.Close()
	path := filepath.Join(dir, name)
	bad := func(format string, a ...any) error {
		return &ManifestError{Dir: path, Msg: fmt.Sprintf(format, a...)}
	}
	want, encs, err := m.tableSchema(c, parent)
	if err != nil {
		return bad("%v", err)
	}
	got := r.Schema()
	exact := -1 // the column of target_sum_exact, if the table has it
	if i := want.Index("target_sum_exact"); i >= 0 {
		if got.Index("target_sum_exact") < 0 {
			// A table written before the exact sums: rounded sums only.
			want.Fields = slices.Delete(want.Fields, i, i+2)
			for k := range encs {
				if encs[k][1] > i {
					encs[k][0], encs[k][1] = encs[k][0]-2, encs[k][1]-2
				}
			}
		} else {
			exact = i
		}
	}
	if len(got.Fields) != len(want.Fields) {
		return bad("table has %d columns, the manifest implies %d", len(got.Fields), len(want.Fields))
	}
	for i, f := range want.Fields {
		if g := got.Fields[i]; g.Name != f.Name || g.Kind != f.Kind {
			return bad("column %d is %q of type %s, expected %q of type %s", i+1, g.Name, g.Kind, f.Name, f.Kind)
		}
	}
	// A table holds the kept levels and, when nulls are unseen, the null
	// level: check the footer's count before reading a row.
	if n := r.NumRows(); stored >= 0 && (n < int64(stored) || n > int64(stored)+1) {
		return bad("%d levels, but the manifest's levels_stored is %d", n, stored)
	}
	of := c
	if parent {
		of = c.Parent
	}
	tl := tableLoad{m: m, c: of, fits: c.Fits, encs: encs, parent: parent, nested: !parent && c.nest != nil && of.info.Supervised, names: want.Fields, exact: exact >= 0}
	if err := table.ForEach(r, tl.batch); err != nil {
		var me *ManifestError
		if errors.As(err, &me) {
			me.Dir = path
			return me
		}
		return bad("%v", err)
	}
	if stored >= 0 && tl.kept != stored {
		return bad("%d levels kept, but the manifest's levels_stored is %d", tl.kept, stored)
	}
	if tl.nested {
		c.nest = tl.parentRow
	}
	of.St.Seal() // the exact sums read for a merge
	of.rowSlots = tl.slots
	of.total = float64(tl.total)
	of.info.Keep, of.info.Total, of.info.Distinct = of.Keep, of.total, of.distinct()
	return nil
}

// tableLoad reads the rows of a mapping table into a column, checking
// each value.
type tableLoad struct {
	m         *Model
	c         *Col            // the column whose levels the table lists
	fits      []method.Fitted // the encodings of the table's column
	encs      [][2]int        // each encoding's range of the table's columns
	parent    bool            // the table of the parent levels
	nested    bool            // the table has parent_row
	names     []table.Field
	slots     []int32 // the slot of each row read
	parentRow []int32 // nested: each slot's parent_row
	row       int64   // rows read
	total     uint64  // fitting rows of the levels read
	null      bool    // the null level was read
	kept      int     // levels read that count as seen
	exact     bool    // the table has a regression target's exact sums
}

// batch loads the rows of one batch.
func (tl *tableLoad) batch(b *table.Batch) error {
	for k := 1; k < len(b.Cols); k++ {
		col := &b.Cols[k]
		form := table.FormFloat64
		switch tl.names[k].Kind {
		case table.Int64:
			form = table.FormInt64
		case table.String:
			form = table.FormText
			if col.Form == table.FormDict {
				form = table.FormDict
			}
		}
		if col.Form != form || col.Len() < b.Rows {
			return tl.errf(0, "column %q does not hold %d values of type %s", tl.names[k].Name, b.Rows, tl.names[k].Kind)
		}
		for i := 0; i < b.Rows; i++ {
			if col.IsNull(i) {
				return tl.errf(i, "column %q is null", tl.names[k].Name)
			}
		}
	}
	lv := &b.Cols[0]
	if lv.Form != table.FormText && lv.Form != table.FormDict {
		return tl.errf(0, "column \"level\" is not text")
	}
	from := len(tl.slots)
	for i := 0; i < b.Rows; i++ {
		if err := tl.level(b, i); err != nil {
			return err
		}
	}
	slots := tl.slots[from:]
	for ei, f := range tl.fits {
		src := b.Cols[tl.encs[ei][0]:tl.encs[ei][1]]
		var err error
		switch pt, ok := f.(method.ParentTabler); {
		case !tl.parent:
			err = f.LoadTable(slots, src)
		case ok:
			err = pt.LoadParentTable(slots, src)
		}
		var le *method.LoadError
		if errors.As(err, &le) {
			return tl.errf(le.Row, "%s", le.Msg)
		}
		if err != nil {
			return tl.errf(0, "%v", err)
		}
	}
	tl.row += int64(b.Rows)
	return nil
}

// errf returns an error of row i of the current batch.
func (tl *tableLoad) errf(i int, format string, a ...any) error {
	return &ManifestError{Msg: fmt.Sprintf("row %d: ", tl.row+int64(i)+1) + fmt.Sprintf(format, a...)}
}

// exactSums reads the exact sums of level l (row i) from their text, each
// of which must round to the sum stored beside it.
func (tl *tableLoad) exactSums(l int, n uint32, sum, sumSq float64, sumText, sqText []byte, i int) error {
	var s, q exactsum.Sum
	if err := s.ParseText(string(sumText)); err != nil {
		return tl.errf(i, "target_sum_exact %.40q: %v", sumText, err)
	}
	if err := q.ParseText(string(sqText)); err != nil {
		return tl.errf(i, "target_sumsq_exact %.40q: %v", sqText, err)
	}
	if math.Float64bits(s.Float64()) != math.Float64bits(sum) || math.Float64bits(q.Float64()) != math.Float64bits(sumSq) || q.Float64() < 0 {
		return tl.errf(i, "target_sum_exact and target_sumsq_exact round to %g and %g, not to target_sum %g and target_sumsq %g", s.Float64(), q.Float64(), sum, sumSq)
	}
	// A sum of float64 values is a multiple of 2^-1074, of their squares
	// of 2^-2148: finer bits come from no table, and a merge that moves
	// them to another origin would outgrow what the text form is read back
	// within.
	if !s.MultipleOf(-1074) || !q.MultipleOf(-2148) {
		return tl.errf(i, "target_sum_exact or target_sumsq_exact has bits finer than a sum of float64 values can")
	}
	tl.c.St.SetExact(l, 0, n, &s, &q)
	return nil
}

// level loads the level and the statistics of row i of b.
func (tl *tableLoad) level(b *table.Batch, i int) error {
	m, c, st := tl.m, tl.c, tl.c.St
	lv := &b.Cols[0]
	l := 0
	if lv.IsNull(i) {
		if tl.null {
			return tl.errf(i, "the null level appears twice")
		}
		tl.null = true
	} else {
		n := st.NumLevels()
		if l = st.Level(lv.Bytes(i)); l < n {
			return tl.errf(i, "level %q appears twice", lv.Bytes(i))
		}
	}
	for len(c.Keep) < st.NumLevels() {
		c.Keep = append(c.Keep, false)
	}
	c.Keep[l] = l != 0 || !m.Spec.NullsUnseen
	if c.Keep[l] {
		tl.kept++
	}
	k := 1
	next := func() *table.Column { k++; return &b.Cols[k-1] }
	rows := next().Ints[i]
	if rows < 1 || uint64(rows) > uint64(m.Rows)-tl.total {
		return tl.errf(i, "rows %d: the levels' rows must be at least 1 and add up to at most the manifest's rows (%d)", rows, m.Rows)
	}
	tl.total += uint64(rows)
	st.SetRows(l, uint64(rows))
	if c.info.Supervised {
		tn := next().Ints[i]
		if tn < 0 || tn > rows || tn > math.MaxUint32 {
			return tl.errf(i, "target_rows %d: want 0 to rows (%d)", tn, rows)
		}
		if m.Task == colstats.Regression {
			sum, sumSq := next().Floats[i], next().Floats[i]
			if math.IsNaN(sum) || math.IsInf(sum, 0) || !(sumSq >= 0) || math.IsInf(sumSq, 0) {
				return tl.errf(i, "target_sum %g, target_sumsq %g: want finite sums, of squares at least 0", sum, sumSq)
			}
			if !tl.exact || !m.exact {
				if tl.exact {
					next()
					next()
				}
				st.SetValue(l, 0, uint32(tn), sum, sumSq)
			} else if err := tl.exactSums(l, uint32(tn), sum, sumSq, next().Bytes(i), next().Bytes(i), i); err != nil {
				return err
			}
		} else {
			var all int64
			for cl := range m.Classes {
				v := next().Ints[i]
				if v < 0 || v > tn {
					return tl.errf(i, "count_%s %d: want 0 to target_rows (%d)", m.Classes[cl], v, tn)
				}
				all += v
				st.SetClass(l, 0, cl, uint32(v))
			}
			if all != tn {
				return tl.errf(i, "the class counts add up to %d, target_rows is %d", all, tn)
			}
		}
	}
	tl.slots = append(tl.slots, int32(l))
	if tl.nested {
		pr := b.Cols[len(b.Cols)-1].Ints[i]
		if pr < -1 || pr > math.MaxInt32 {
			return tl.errf(i, "parent_row %d: want -1 or a row of the parent table", pr)
		}
		for len(tl.parentRow) < st.NumLevels() {
			tl.parentRow = append(tl.parentRow, -1)
		}
		tl.parentRow[l] = int32(pr)
	}
	return nil
}
