package pipeline

import (
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"manyfold/io/tableio"
)

// TestPSI checks the index against encoding-math.md's check value
// (e=[0.5,0.3,0.2], a=[0.4,0.35,0.25]) and the floor of an empty bin,
// worked out term by term: (0.4-0.5) ln(0.4/0.5) + (0.1-0.0001)
// ln(0.1/0.0001).
func TestPSI(t *testing.T) {
	if got, want := PSI([]float64{0.5, 0.3, 0.2}, []float64{0.4, 0.35, 0.25}), 0.04117906668849437; math.Abs(got-want) > 1e-15 {
		t.Errorf("PSI %.17g, want %.17g", got, want)
	}
	want := -0.1*math.Log(0.8) + 0.0999*math.Log(1000)
	if got := PSI([]float64{0.5, 0.5, 0}, []float64{0.5, 0.4, 0.1}); math.Abs(got-want) > 1e-15 {
		t.Errorf("PSI with an empty training bin %.17g, want %.17g", got, want)
	}
	if got := PSI([]float64{0.5, 0.5}, []float64{1, 0}); math.Abs(got-(0.5*math.Log(2)+(0.0001-0.5)*math.Log(0.0001/0.5))) > 1e-15 {
		t.Errorf("PSI with an empty new bin %.17g", got)
	}
	if got := PSI([]float64{1}, []float64{0.5, 0.5}); !math.IsNaN(got) {
		t.Errorf("PSI of bins of other lengths %g, want NaN", got)
	}
}

// TestDriftCounts applies tables to new rows whose unseen values are
// known: the distinct unseen values counted stop at MaxUnseen (the report
// says so and gives the rows of the others), a value under MinLevelRows
// is withheld, a null level the training rows lacked is unseen, the bins
// are the training table's largest levels, and the thresholds are held.
func TestDriftCounts(t *testing.T) {
	train := scoreCSV(600)
	sp := planSpec(t, "target:eb+freq")
	sp.Columns, sp.Target = []string{"pc", "sender"}, "late"
	m0, _, _, dir := encodeCSV(t, train, sp)
	tables := filepath.Join(dir, "tables")
	if err := m0.SaveTables(tables); err != nil {
		t.Fatal(err)
	}
	m, _, err := LoadTablesManifest(tables)
	if err != nil {
		t.Fatal(err)
	}
	// New rows: pc P00 x5, U1 x3, U2 x1, U3 x4 (met third); sender S1,
	// then null x2 (the training rows have no null sender).
	var b strings.Builder
	b.WriteString("pc,sender,late,weight,grade\n")
	for _, pc := range []string{"P00", "U1", "P00", "U2", "U1", "U3", "P00", "U3", "U1", "U3", "P00", "U3", "P00"} {
		b.WriteString(pc + ",S1,1,1.0,A\n")
	}
	b.WriteString("P00,,0,1.0,A\nP00,,0,1.0,A\n")
	in := filepath.Join(dir, "new.csv")
	if err := os.WriteFile(in, []byte(b.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	r, err := tableio.Open(in, tableio.ReadOptions{})
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	d := NewDrift(m, DriftOptions{MinLevelRows: 2, Top: 5, Bins: 3, MaxUnseen: 2})
	s, _, _, err := m.OutputSchema(in, r.Schema(), NewRows)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := m.Encode(r, &captureWriter{names: s.Names(), cols: textCols{}}, EncodeOptions{File: in, Use: NewRows, Drift: d}); err != nil {
		t.Fatal(err)
	}
	rep := d.Report()
	if rep.Rows != 15 || rep.MinLevelRows != 2 || rep.Target == nil || *rep.Target != "late" || rep.TargetRows == nil || *rep.TargetRows != 15 {
		t.Errorf("report rows %d, min level rows %d, target %v, target rows %v", rep.Rows, rep.MinLevelRows, rep.Target, rep.TargetRows)
	}
	pc, sender := rep.Columns[0], rep.Columns[1]
	if pc.UnseenRows != 8 || pc.UnseenRowShare != 8.0/15 || !pc.UnseenCapped || pc.UncountedRows != 4 ||
		pc.UnseenLevels != 2 || pc.Levels != 3 || pc.Withheld != 1 {
		t.Errorf("pc: %+v; want 8 unseen rows, capped at U1 and U2 with U3's 4 rows uncounted, levels 2 of at least 3, U2 withheld", pc)
	}
	if len(pc.TopUnseen) != 1 || *pc.TopUnseen[0].Level != "U1" || pc.TopUnseen[0].Rows != 3 {
		t.Errorf("pc's top unseen %v, want U1 3", pc.TopUnseen)
	}
	if sender.UnseenRows != 2 || sender.UnseenLevels != 1 || sender.Levels != 2 || len(sender.TopUnseen) != 1 ||
		sender.TopUnseen[0].Level != nil || sender.TopUnseen[0].Rows != 2 || sender.UnseenCapped {
		t.Errorf("sender: %+v; want the null level unseen, 2 rows", sender)
	}
	// The bins: pc's three largest training levels, then other.
	counts := map[string]int64{}
	for _, line := range strings.Split(strings.TrimSpace(train), "\n")[1:] {
		counts[strings.Split(line, ",")[0]]++
	}
	var levels []string
	for l := range counts {
		levels = append(levels, l)
	}
	slices.SortFunc(levels, func(a, b string) int {
		if counts[a] != counts[b] {
			return int(counts[b] - counts[a])
		}
		if a == "" || b == "" {
			return strings.Compare(b, a) * -1
		}
		return strings.Compare(a, b)
	})
	if len(pc.Bins) != 4 || !pc.Bins[3].Other {
		t.Fatalf("pc's bins %+v, want 3 and other", pc.Bins)
	}
	var e, a []float64
	var rest int64 = 600
	for i, bin := range pc.Bins[:3] {
		name := ""
		if bin.Level != nil {
			name = *bin.Level
		}
		if name != levels[i] || bin.TrainingRows != counts[name] {
			t.Errorf("bin %d: %v %d rows, want %q %d", i, name, bin.TrainingRows, levels[i], counts[levels[i]])
		}
		rest -= counts[levels[i]]
		e, a = append(e, float64(counts[levels[i]])/600), append(a, bin.Actual)
	}
	if pc.Bins[3].TrainingRows != rest || pc.Bins[3].Expected != float64(rest)/600 {
		t.Errorf("other bin %+v, want %d training rows", pc.Bins[3], rest)
	}
	var want float64
	for i := range e {
		want += psiTermForTest(e[i], a[i])
	}
	want += psiTermForTest(float64(rest)/600, pc.Bins[3].Actual)
	if pc.PSI == nil || math.Abs(*pc.PSI-want) > 1e-12 {
		t.Errorf("pc's PSI %v, want %.17g", pc.PSI, want)
	}
	// Thresholds: levels is a lower bound here, still held.
	th, err := ParseThresholds("unseen=0.5,levels=0.6,psi=1000")
	if err != nil {
		t.Fatal(err)
	}
	failed := rep.Check(th)
	if len(failed) != 2 || failed[0] != (Breach{"pc", "unseen", 8.0 / 15, 0.5}) || failed[1] != (Breach{"pc", "levels", 2.0 / 3, 0.6}) {
		t.Errorf("breaches %+v", failed)
	}
}

// psiTermForTest is one bin's (a - e) ln(a / e), a share of 0 taken as
// 0.0001.
func psiTermForTest(e, a float64) float64 {
	e, a = max(e, 0.0001), max(a, 0.0001)
	return (a - e) * math.Log(a/e)
}

// TestParseThresholds: the grammar and its errors.
func TestParseThresholds(t *testing.T) {
	th, err := ParseThresholds("unseen=0.2, psi=0.25,levels=0,auc_drop=0.05,rmse_rise=3")
	if err != nil {
		t.Fatal(err)
	}
	if *th.Unseen != 0.2 || *th.PSI != 0.25 || *th.Levels != 0 || *th.AUCDrop != 0.05 || *th.RMSERise != 3 {
		t.Errorf("thresholds %+v", th)
	}
	if th, err := ParseThresholds(""); err != nil || th.Unseen != nil || th.PSI != nil {
		t.Errorf("empty list: %+v, %v", th, err)
	}
	for in, want := range map[string]string{
		"unseen":              `"unseen": want NAME=NUMBER`,
		"drift=0.1":           "NAME one of unseen, levels, psi, auc_drop, rmse_rise",
		"psi=0.1,psi=0.2":     "psi is given twice",
		"psi=-1":              "psi=-1: want a finite number of at least 0",
		"psi=NaN":             "want a finite number",
		"unseen=0.2,,psi=0.1": `"": want NAME=NUMBER`,
	} {
		if _, err := ParseThresholds(in); err == nil || !strings.Contains(err.Error(), want) {
			t.Errorf("%q: error %v, want %q", in, err, want)
		}
	}
}
