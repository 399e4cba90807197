package pipeline

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"strconv"
	"strings"

	"github.com/cespare/xxhash/v2"

	"manyfold/encoders/colstats"
	"manyfold/encoders/hashenc"
	"manyfold/io/pqio"
	"manyfold/io/table"
)

// maxManifestBytes bounds the manifest the loader reads into memory: a
// manifest of a thousand multi-class columns takes a few megabytes.
const maxManifestBytes = 64 << 20

// LoadTables reads a tables directory written by SaveTables into a model
// that encodes new rows (EncodeOptions.Apply) and merges with others.
//
// Nothing in the directory is trusted: the manifest must hold every field
// SaveTables writes, each within its domain and consistent with the others;
// a table must be a regular file named by a plain file name in dir (no
// path, no symbolic link), with the checksum the manifest records, the
// columns and types the fit implies and values within their domains. Any
// other directory gives a ManifestError naming the field or file.
func LoadTables(dir string) (*Model, error) {
	mf, err := readManifest(dir)
	if err != nil {
		return nil, err
	}
	sp, err := mf.check()
	if err != nil {
		return nil, &ManifestError{Dir: dir, Msg: ManifestName + ": " + err.Error()}
	}
	m := &Model{Spec: sp, Classes: mf.Classes, Rows: mf.Rows, Missing: mf.Missing, Origin: mf.Origin}
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
	for _, mc := range mf.Columns {
		k, _ := table.ParseKind(mc.Type) // checked
		c, err := m.loadCol(dir, mc.Table, mc.TableSum, supervised, mc.Prior, mc.M, mc.Stored)
		if err != nil {
			return nil, err
		}
		if supervised && mc.ParentTable == "" {
			if err := m.checkEncoded(c); err != nil {
				return nil, &ManifestError{Dir: filepath.Join(dir, mc.Table), Msg: err.Error()}
			}
		}
		c.Name, c.Kind = mc.Name, k
		if mc.ParentTable != "" {
			p, err := m.loadCol(dir, mc.ParentTable, mc.ParentSum, supervised, mc.ParentPrior, mc.ParentM, -1)
			if err != nil {
				return nil, err
			}
			c.Parent = p
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
		m.Cols = append(m.Cols, c)
	}
	return m, nil
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
	if err := requireFields(data, reflect.TypeOf(Manifest{}), ""); err != nil {
		return nil, bad("%v", err)
	}
	dec := json.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	var mf Manifest
	if err := dec.Decode(&mf); err != nil {
		return nil, bad("%v", err)
	}
	if _, err := dec.Token(); err != io.EOF {
		return nil, bad("more data after the manifest's object")
	}
	return &mf, nil
}

// requireFields checks that the JSON object data has every field of the
// struct type t whose tag does not say omitempty, not null, and so on down
// the nested structs and slices of structs; at names the object in errors.
func requireFields(data []byte, t reflect.Type, at string) error {
	var obj map[string]json.RawMessage
	if err := json.Unmarshal(data, &obj); err != nil {
		return fmt.Errorf("%s: %v", orTop(at), err)
	}
	for i := 0; i < t.NumField(); i++ {
		f := t.Field(i)
		name, opts, _ := strings.Cut(f.Tag.Get("json"), ",")
		if name == "" || name == "-" {
			continue
		}
		path := name
		if at != "" {
			path = at + "." + name
		}
		raw, ok := obj[name]
		if !ok || string(raw) == "null" {
			if strings.Contains(opts, "omitempty") {
				continue
			}
			return fmt.Errorf("%s is missing", path)
		}
		ft := f.Type
		switch {
		case ft.Kind() == reflect.Struct:
			if err := requireFields(raw, ft, path); err != nil {
				return err
			}
		case ft.Kind() == reflect.Slice && ft.Elem().Kind() == reflect.Struct:
			var elems []json.RawMessage
			if err := json.Unmarshal(raw, &elems); err != nil {
				return fmt.Errorf("%s: %v", path, err)
			}
			for j, e := range elems {
				if err := requireFields(e, ft.Elem(), fmt.Sprintf("%s[%d]", path, j)); err != nil {
					return err
				}
			}
		}
	}
	return nil
}

func orTop(at string) string {
	if at == "" {
		return "the manifest"
	}
	return at
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
	outs := 0
	if supervised {
		outs = 1
		if task == colstats.Multiclass {
			outs = len(mf.Classes)
		}
	}
	hier := supervised && (sp.PriorPrefix > 0 || sp.PriorColumn != "")
	for i := range mf.Columns {
		if err := mf.checkColumn(i, kinds, task, outs, hier, sp.Smoothing); err != nil {
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

// checkParams checks the parameters and returns the job they describe.
func (mf *Manifest) checkParams(kinds map[string]table.Kind) (Spec, error) {
	p := &mf.Params
	switch {
	case p.Freq != "count" && p.Freq != "share":
		return Spec{}, fmt.Errorf("params.freq %q: want count or share", p.Freq)
	case p.Nulls != "level" && p.Nulls != "unseen":
		return Spec{}, fmt.Errorf("params.nulls %q: want level or unseen", p.Nulls)
	case p.PriorPrefix < 0:
		return Spec{}, fmt.Errorf("params.prior_prefix %d: want 0 or more", p.PriorPrefix)
	}
	sp, err := specFrom(mf)
	if err != nil {
		return Spec{}, fmt.Errorf("params.smoothing: %v", err)
	}
	if err := sp.Validate(); err != nil {
		return Spec{}, fmt.Errorf("params: %v", err)
	}
	seen := map[string]bool{}
	for _, m := range p.Methods {
		if seen[m] {
			return Spec{}, fmt.Errorf("params.methods names %q twice", m)
		}
		seen[m] = true
	}
	if mf.Task == "" && sp.FoldBy == "stratified" {
		return Spec{}, errors.New("params.fold_by is stratified but task is empty")
	}
	if mf.Task != "" && !sp.has(MethodTarget) && sp.FoldBy != "stratified" {
		return Spec{}, fmt.Errorf("task %q but neither the target method nor stratified folds", mf.Task)
	}
	if c := sp.PriorColumn; c != "" {
		if _, ok := kinds[c]; !ok {
			return Spec{}, fmt.Errorf("params.prior_column %q is not among the input columns", c)
		}
	}
	return sp, nil
}

// checkColumn checks columns[i]: outs values of priors and smoothing
// weights (0 without a target), parent tables when hier.
func (mf *Manifest) checkColumn(i int, kinds map[string]table.Kind, task colstats.Task, outs int, hier bool, sm colstats.Smoothing) error {
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
	rate := task != colstats.Regression
	if err := checkFits(at, "prior", "m", c.Prior, c.M, outs, rate, sm); err != nil {
		return err
	}
	if !hier {
		switch {
		case c.ParentTable != "":
			return fmt.Errorf("%s.parent_table %q, but the fit has no hierarchical prior", at, c.ParentTable)
		case c.ParentSum != "" || len(c.ParentPrior) > 0 || len(c.ParentM) > 0:
			return fmt.Errorf("%s has parent values, but the fit has no hierarchical prior", at)
		}
		return nil
	}
	if c.ParentTable == "" {
		return fmt.Errorf("%s.parent_table is missing; the fit has a hierarchical prior", at)
	}
	if err := checkTableName(at+".parent_table", c.ParentTable, strings.TrimSuffix(c.Table, ".parquet")+".parents.parquet"); err != nil {
		return err
	}
	if err := checkSum(at+".parent_table_xxh64", c.ParentSum); err != nil {
		return err
	}
	return checkFits(at, "parent_prior", "parent_m", c.ParentPrior, c.ParentM, outs, rate, sm)
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

// checkFits checks a column's priors and smoothing weights: outs of each,
// priors finite (within [0, 1] for a rate), weights null (infinite) or at
// least 0: the m of params.smoothing m=M, null for a blend.
func checkFits(at, priorName, mName string, prior, ms []*float64, outs int, rate bool, sm colstats.Smoothing) error {
	if len(prior) != outs {
		return fmt.Errorf("%s.%s has %d values; the target implies %d", at, priorName, len(prior), outs)
	}
	if len(ms) != outs {
		return fmt.Errorf("%s.%s has %d values; the target implies %d", at, mName, len(ms), outs)
	}
	for o := 0; o < outs; o++ {
		p := prior[o]
		switch {
		case p == nil || math.IsNaN(*p) || math.IsInf(*p, 0):
			return fmt.Errorf("%s.%s[%d] is not a number", at, priorName, o)
		case rate && (*p < 0 || *p > 1):
			return fmt.Errorf("%s.%s[%d] is %g, not a rate", at, priorName, o, *p)
		}
		m := ms[o]
		switch {
		case m != nil && !(*m >= 0):
			return fmt.Errorf("%s.%s[%d] is %g; want a number >= 0 or null (infinite)", at, mName, o, *m)
		case sm.Kind == "m" && (m == nil || *m != sm.M):
			return fmt.Errorf("%s.%s[%d] is %s, but params.smoothing is m=%g", at, mName, o, optText(m), sm.M)
		case sm.Kind == "blend" && m != nil:
			return fmt.Errorf("%s.%s[%d] is %g, but params.smoothing is a blend, which has no m", at, mName, o, *m)
		}
	}
	return nil
}

// optText prints an optional number, null when absent.
func optText(p *float64) string {
	if p == nil {
		return "null"
	}
	return strconv.FormatFloat(*p, 'g', -1, 64)
}

// specFrom returns the job the manifest's parameters describe.
func specFrom(mf *Manifest) (Spec, error) {
	p := mf.Params
	sm, err := ParseSmoothing(p.Smoothing)
	if err != nil {
		return Spec{}, err
	}
	sp := Spec{Target: mf.Target, Methods: p.Methods, Task: mf.Task, Folds: p.Folds, FoldBy: p.FoldBy, Seed: p.Seed,
		Scheme: p.Scheme, Smoothing: sm, PriorPrefix: p.PriorPrefix, PriorColumn: p.PriorColumn, Output: p.Output, FreqShare: p.Freq == "share",
		TopK: p.TopK, MinCount: p.MinCount, Buckets: p.Buckets, HashSeed: p.HashSeed, Signed: p.Signed,
		MinLevelRows: p.MinLevelRows, NullsUnseen: p.Nulls == "unseen", KeepAll: true}
	sp.Smoothing.Interior = sp.Output == "logodds" // as Validate sets it
	for _, c := range mf.Columns {
		sp.Columns = append(sp.Columns, c.Name)
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

// loadCol reads one mapping table into a column whose statistics have a
// single fold and whose derived values are those stored. stored is the
// number of levels the manifest says the table keeps (-1 for a parent
// table, which the manifest does not count).
func (m *Model) loadCol(dir, name, sum string, supervised bool, prior, ms []*float64, stored int) (*Col, error) {
	r, err := openTable(dir, name, sum)
	if err != nil {
		return nil, err
	}
	defer r.Close()
	path := filepath.Join(dir, name)
	bad := func(format string, a ...any) error {
		return &ManifestError{Dir: path, Msg: fmt.Sprintf(format, a...)}
	}
	nested := supervised && m.Spec.PriorColumn != "" && stored >= 0
	want := m.tableSchema(supervised, nested)
	got := r.Schema()
	if len(got.Fields) != len(want.Fields) {
		return nil, bad("table has %d columns, the manifest implies %d", len(got.Fields), len(want.Fields))
	}
	for i, f := range want.Fields {
		if g := got.Fields[i]; g.Name != f.Name || g.Kind != f.Kind {
			return nil, bad("column %d is %q of type %s, expected %q of type %s", i+1, g.Name, g.Kind, f.Name, f.Kind)
		}
	}
	// A table holds the kept levels and, when nulls are unseen, the null
	// level: check the footer's count before reading a row.
	if n := r.NumRows(); stored >= 0 && (n < int64(stored) || n > int64(stored)+1) {
		return nil, bad("%d levels, but the manifest's levels_stored is %d", n, stored)
	}
	task := m.Task
	if !supervised {
		task = colstats.Binary
	}
	st := colstats.New(task, 1, len(m.Classes), 1024)
	st.Origin = m.Origin
	c := &Col{St: st}
	outs := 0
	if supervised {
		outs = st.Outputs()
		c.TMean = make([][]float64, outs)
		for o := 0; o < outs; o++ {
			c.Full = append(c.Full, colstats.Fitted{Prior: fromOpt(prior[o]), M: fromOpt(ms[o]), Sm: m.Spec.Smoothing, Origin: m.Origin})
			c.TMean[o] = []float64{0}
		}
	}
	c.Freq, c.TopK, c.Keep = []float64{0}, []int32{0}, []bool{false}
	tl := tableLoad{m: m, c: c, task: task, outs: outs, supervised: supervised, nested: nested, names: want.Fields}
	if err := table.ForEach(r, tl.batch); err != nil {
		var me *ManifestError
		if errors.As(err, &me) {
			me.Dir = path
			return nil, me
		}
		return nil, bad("%v", err)
	}
	if stored >= 0 && tl.kept != stored {
		return nil, bad("%d levels kept, but the manifest's levels_stored is %d", tl.kept, stored)
	}
	c.nest = tl.parentRow
	c.rowSlots = tl.slots
	return c, nil
}

// tableLoad reads the rows of a mapping table into a column, checking
// each value.
type tableLoad struct {
	m          *Model
	c          *Col
	task       colstats.Task
	outs       int
	supervised bool
	nested     bool // the table has parent_row
	names      []table.Field
	slots      []int32 // the slot of each row read
	parentRow  []int32 // nested: each slot's parent_row
	row        int64   // rows read
	total      uint64  // fitting rows of the levels read
	null       bool    // the null level was read
	kept       int     // levels read that count as seen
}

// batch loads the rows of one batch.
func (tl *tableLoad) batch(b *table.Batch) error {
	for k := 1; k < len(b.Cols); k++ {
		col := &b.Cols[k]
		form := table.FormFloat64
		if tl.names[k].Kind == table.Int64 {
			form = table.FormInt64
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
	for i := 0; i < b.Rows; i++ {
		if err := tl.level(b, i); err != nil {
			return err
		}
	}
	tl.row += int64(b.Rows)
	return nil
}

// errf returns an error of row i of the current batch.
func (tl *tableLoad) errf(i int, format string, a ...any) error {
	return &ManifestError{Msg: fmt.Sprintf("row %d: ", tl.row+int64(i)+1) + fmt.Sprintf(format, a...)}
}

// level loads row i of b, one level.
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
		c.Keep, c.Freq, c.TopK = append(c.Keep, false), append(c.Freq, 0), append(c.TopK, 0)
		for o := range c.TMean {
			c.TMean[o] = append(c.TMean[o], 0)
		}
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
	if tl.supervised {
		tn := next().Ints[i]
		if tn < 0 || tn > rows || tn > math.MaxUint32 {
			return tl.errf(i, "target_rows %d: want 0 to rows (%d)", tn, rows)
		}
		if tl.task == colstats.Regression {
			sum, sumSq := next().Floats[i], next().Floats[i]
			if math.IsNaN(sum) || math.IsInf(sum, 0) || !(sumSq >= 0) || math.IsInf(sumSq, 0) {
				return tl.errf(i, "target_sum %g, target_sumsq %g: want finite sums, of squares at least 0", sum, sumSq)
			}
			st.SetValue(l, 0, uint32(tn), sum, sumSq)
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
		for o := 0; o < tl.outs; o++ {
			v := next().Floats[i]
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return tl.errf(i, "%s %g: want a finite number", tl.names[k-1].Name, v)
			}
			if tl.task != colstats.Regression && (v < 0 || v > 1) {
				return tl.errf(i, "%s %g: want a rate within [0, 1]", tl.names[k-1].Name, v)
			}
			c.TMean[o][l] = v
		}
	}
	freq := next().Floats[i]
	if !(freq >= 0) || math.IsInf(freq, 0) {
		return tl.errf(i, "freq %g: want a finite number >= 0", freq)
	}
	c.Freq[l] = freq
	top := next().Ints[i]
	if top < 0 || top > int64(m.Spec.TopK) || top > math.MaxInt32 {
		return tl.errf(i, "topk %d: want 0 to the manifest's top_k (%d)", top, m.Spec.TopK)
	}
	c.TopK[l] = int32(top)
	bucket := next().Ints[i]
	if want := hashenc.Bucket(hashenc.Sum(lv.Bytes(i), m.Spec.HashSeed), m.Spec.Buckets); bucket < 0 || uint64(bucket) != want {
		return tl.errf(i, "bucket %d, but the manifest's buckets and hash_seed give %d", bucket, want)
	}
	tl.slots = append(tl.slots, int32(l))
	if tl.nested {
		pr := next().Ints[i]
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

// checkEncoded checks the encoded values stored in a table without a
// hierarchical prior against those its counts give with the manifest's
// priors, smoothing weights and smoothing: the prior for a level left out,
// the smoothed mean of its rows otherwise. A manifest whose prior, m or
// smoothing was changed, or a table fitted with others, is refused.
func (m *Model) checkEncoded(c *Col) error {
	st := c.St
	for l := 0; l < st.NumLevels(); l++ {
		if l == 0 && st.RowCount(0) == 0 {
			continue // no null level in the table
		}
		for o := range c.Full {
			ft := &c.Full[o]
			want := ft.Prior
			if c.Keep[l] {
				want = ft.Encode(st.Target(l, o, -1, m.Pos))
			}
			got := c.TMean[o][l]
			if math.Abs(got-want) <= 1e-9*max(1, math.Abs(want)) {
				continue
			}
			level := "the null level"
			if l > 0 {
				level = strconv.Quote(string(st.Bytes(l)))
			}
			return fmt.Errorf("%s: encoded value %g, but its counts with the manifest's prior, m and smoothing give %g", level, got, want)
		}
	}
	return nil
}
