package main

import (
	"bytes"
	"encoding/json"
	"encoding/xml"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	"manyfold/internal/parcels"
	"manyfold/io/table"
	"manyfold/io/tableio"
)

// driftNull stands for the null level in the test's counts.
const driftNull = "\x00null"

// rawCSV is a CSV file the test wrote, read back as the text of its cells
// (no quoting: the parcel tables hold no comma or quote).
type rawCSV struct {
	names []string
	rows  [][]string
}

func (r rawCSV) col(t *testing.T, name string) []string {
	t.Helper()
	j := slices.Index(r.names, name)
	if j < 0 {
		t.Fatalf("no column %q", name)
	}
	out := make([]string, len(r.rows))
	for i, row := range r.rows {
		out[i] = row[j]
		if out[i] == "" {
			out[i] = driftNull
		}
	}
	return out
}

// writeParcelsCSV generates cfg's shipments as CSV at path, emptying
// column blank in every every-th row (every 0: none) so that the data has
// null levels, and returns the cells.
func writeParcelsCSV(t *testing.T, path string, cfg parcels.Config, blank string, every int) rawCSV {
	t.Helper()
	tmp := path + ".gen.csv"
	w, err := tableio.Create(tmp, parcels.Schema(), tableio.WriteOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if err := parcels.Generate(cfg, w); err != nil {
		t.Fatal(err)
	}
	if err := w.Commit(); err != nil {
		t.Fatal(err)
	}
	data, err := os.ReadFile(tmp)
	if err != nil {
		t.Fatal(err)
	}
	if bytes.ContainsAny(data, "\"\r") {
		t.Fatal("the generated CSV holds quotes or CRs; the test reads it as plain text")
	}
	lines := strings.Split(strings.TrimSuffix(string(data), "\n"), "\n")
	raw := rawCSV{names: strings.Split(lines[0], ",")}
	j := slices.Index(raw.names, blank)
	var out strings.Builder
	out.WriteString(lines[0] + "\n")
	for i, l := range lines[1:] {
		cells := strings.Split(l, ",")
		if every > 0 && i%every == every-1 {
			cells[j] = ""
		}
		raw.rows = append(raw.rows, cells)
		out.WriteString(strings.Join(cells, ",") + "\n")
	}
	if err := os.WriteFile(path, []byte(out.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	return raw
}

// countLevels counts the rows of each level.
func countLevels(vals []string) map[string]int64 {
	c := map[string]int64{}
	for _, v := range vals {
		c[v]++
	}
	return c
}

// levelOrder sorts levels by rows, most first, then the null level, then
// by their bytes: the report's order.
func levelOrder(counts map[string]int64) func(a, b string) int {
	return func(a, b string) int {
		switch {
		case counts[a] != counts[b]:
			if counts[a] > counts[b] {
				return -1
			}
			return 1
		case a == driftNull:
			return -1
		case b == driftNull:
			return 1
		}
		return strings.Compare(a, b)
	}
}

// pairAUC is the AUC of score for the rows labelled pos against the
// others, counted pair by pair (Mann-Whitney; ties one half).
func pairAUC(score []float64, label []string, pos string) float64 {
	var wins, pairs float64
	for i := range score {
		if label[i] != pos {
			continue
		}
		for j := range score {
			if label[j] != pos {
				pairs++
				if score[i] > score[j] {
					wins++
				} else if score[i] == score[j] {
					wins += 0.5
				}
			}
		}
	}
	return wins / pairs
}

func parseFloats(t *testing.T, cells []string) []float64 {
	t.Helper()
	out := make([]float64, len(cells))
	for i, c := range cells {
		out[i] = parseF(t, c)
	}
	return out
}

// driftFigures is what the test recomputes of one column from the raw
// rows.
type driftFigures struct {
	unseenRows, levels, unseenLevels, withheld int64
	top                                        []string
	topRows                                    []int64
	binLevels                                  []string
	binTrain, binRows                          []int64
	psi                                        float64
}

// recompute works out a column's figures from the training and new cells:
// a level is seen when the training rows hold it at least fitMin times.
func recompute(train, fresh []string, fitMin, listMin int64) driftFigures {
	tc, nc := countLevels(train), countLevels(fresh)
	var f driftFigures
	var unseen []string
	for l, n := range nc {
		f.levels++
		if tc[l] < fitMin || tc[l] == 0 {
			f.unseenLevels++
			f.unseenRows += n
			unseen = append(unseen, l)
		}
	}
	slices.SortFunc(unseen, levelOrder(nc))
	for _, l := range unseen {
		switch {
		case nc[l] < listMin:
			f.withheld++
		case len(f.top) < 10:
			f.top = append(f.top, l)
			f.topRows = append(f.topRows, nc[l])
		}
	}
	var stored []string
	for l, n := range tc {
		if n >= fitMin {
			stored = append(stored, l)
		}
	}
	slices.SortFunc(stored, levelOrder(tc))
	restT, restN := int64(len(train)), int64(len(fresh))
	term := func(tr, nr int64) float64 {
		e, a := float64(tr)/float64(len(train)), float64(nr)/float64(len(fresh))
		e, a = max(e, 0.0001), max(a, 0.0001) // a share of 0 counts as 0.0001
		return (a - e) * math.Log(a/e)
	}
	for _, l := range stored[:min(20, len(stored))] {
		f.binLevels = append(f.binLevels, l)
		f.binTrain, f.binRows = append(f.binTrain, tc[l]), append(f.binRows, nc[l])
		restT -= tc[l]
		restN -= nc[l]
		f.psi += term(tc[l], nc[l])
	}
	f.binTrain, f.binRows = append(f.binTrain, restT), append(f.binRows, restN)
	f.psi += term(restT, restN)
	return f
}

func levelName(l *string) string {
	if l == nil {
		return driftNull
	}
	return *l
}

// keysOf returns the sorted keys of a JSON object.
func keysOf(m map[string]any) []string {
	var out []string
	for k := range m {
		out = append(out, k)
	}
	slices.Sort(out)
	return out
}

func sorted(s ...string) []string { slices.Sort(s); return s }

// TestApplyDriftReport applies mapping tables fitted on generated shipments
// (every 37th postcode null, --min-level-rows 3) to new shipments of the
// same network with a known shift (30% of postcodes and accounts from a
// pool the training rows never saw, every 23rd account null, which the
// training rows never are), and checks every figure of the report against
// its recomputation from the raw rows: unseen row and level shares, the
// listed unseen levels and those withheld under --min-level-rows, the PSI
// bins and index, the AUC of each target mean on the new rows and on the
// training rows (counted pair by pair) and their change. The JSON holds
// every field; the HTML page holds no script and parses as XML; a Parquet
// copy of the new rows (dictionary-encoded) gives the same report.
func TestApplyDriftReport(t *testing.T) {
	dir := t.TempDir()
	train := writeParcelsCSV(t, filepath.Join(dir, "train.csv"),
		parcels.Config{Rows: 12000, Seed: 7, Postcodes: 1500, Accounts: 3000}, "dest_postcode", 37)
	fresh := writeParcelsCSV(t, filepath.Join(dir, "new.csv"),
		parcels.Config{Rows: 3000, Seed: 7, Stream: 1, Postcodes: 1500, Accounts: 3000, UnseenShare: 0.3}, "sender_account", 23)
	tables := filepath.Join(dir, "tables")
	cols := []string{"dest_postcode", "sender_account", "route"}
	mustRun(t, "encode", filepath.Join(dir, "train.csv"), "--target", "late", "--columns", strings.Join(cols, ","),
		"--methods", "target:eb+freq", "--min-level-rows", "3", "--out", filepath.Join(dir, "train_enc.csv"), "--tables", tables)
	rj, rh := filepath.Join(dir, "r.json"), filepath.Join(dir, "r.html")
	res := mustRun(t, "apply", filepath.Join(dir, "new.csv"), "--tables", tables, "--out", filepath.Join(dir, "new_enc.csv"),
		"--report", rj, "--report", rh, "--min-level-rows", "5")
	if !strings.Contains(res.stderr, "and "+rj+" and "+rh) {
		t.Errorf("summary %q does not name the reports", res.stderr)
	}
	data, err := os.ReadFile(rj)
	if err != nil {
		t.Fatal(err)
	}
	var rep struct {
		Rows         int64
		Target       *string
		TargetRows   *int64 `json:"target_rows"`
		MinLevelRows int64  `json:"min_level_rows"`
		Columns      []struct {
			Column           string
			UnseenRows       int64   `json:"unseen_rows"`
			UnseenRowShare   float64 `json:"unseen_row_share"`
			Levels           int64
			UnseenLevels     int64   `json:"unseen_levels"`
			UnseenLevelShare float64 `json:"unseen_level_share"`
			Capped           bool    `json:"unseen_levels_capped"`
			TopUnseen        []struct {
				Level *string
				Rows  int64
			} `json:"top_unseen"`
			Withheld int64 `json:"unseen_levels_withheld"`
			PSI      *float64
			Bins     []struct {
				Level            *string
				Other            bool
				TrainingRows     int64 `json:"training_rows"`
				Rows             int64
				Expected, Actual float64
			} `json:"psi_bins"`
			Score *struct {
				Metric, Output        string
				Rows                  int64
				New, Training, Change *float64
			}
		}
		Failed []any
	}
	if err := json.Unmarshal(data, &rep); err != nil {
		t.Fatal(err)
	}
	if rep.Rows != 3000 || rep.Target == nil || *rep.Target != "late" || rep.TargetRows == nil || *rep.TargetRows != 3000 || rep.MinLevelRows != 5 || len(rep.Failed) != 0 {
		t.Errorf("report head: rows %d, target %v, target rows %v, min level rows %d, failed %v", rep.Rows, rep.Target, rep.TargetRows, rep.MinLevelRows, rep.Failed)
	}
	trainEnc, newEnc := readTable(t, filepath.Join(dir, "train_enc.csv")), readTable(t, filepath.Join(dir, "new_enc.csv"))
	manifest := readManifest(t, tables)
	near := func(a, b float64) bool { return math.Abs(a-b) <= 1e-12 }
	for i, col := range cols {
		c := rep.Columns[i]
		f := recompute(train.col(t, col), fresh.col(t, col), 3, 5)
		t.Logf("%s: unseen rows %d, levels %d of %d, withheld %d, PSI %.6f", col, f.unseenRows, f.unseenLevels, f.levels, f.withheld, f.psi)
		if c.Column != col || c.UnseenRows != f.unseenRows || !near(c.UnseenRowShare, float64(f.unseenRows)/3000) ||
			c.Levels != f.levels || c.UnseenLevels != f.unseenLevels || !near(c.UnseenLevelShare, float64(f.unseenLevels)/float64(f.levels)) ||
			c.Withheld != f.withheld || c.Capped {
			t.Errorf("%s: unseen rows %d (%g), levels %d of %d (%g), withheld %d; recomputed %+v", col, c.UnseenRows, c.UnseenRowShare,
				c.UnseenLevels, c.Levels, c.UnseenLevelShare, c.Withheld, f)
		}
		var top []string
		var topRows []int64
		for _, u := range c.TopUnseen {
			top, topRows = append(top, levelName(u.Level)), append(topRows, u.Rows)
		}
		if !slices.Equal(top, f.top) || !slices.Equal(topRows, f.topRows) {
			t.Errorf("%s: top unseen %q %v, recomputed %q %v", col, top, topRows, f.top, f.topRows)
		}
		if len(c.Bins) != len(f.binTrain) {
			t.Fatalf("%s: %d bins, recomputed %d", col, len(c.Bins), len(f.binTrain))
		}
		for k, b := range c.Bins {
			other := k == len(c.Bins)-1
			if b.Other != other || (!other && levelName(b.Level) != f.binLevels[k]) || b.TrainingRows != f.binTrain[k] || b.Rows != f.binRows[k] ||
				!near(b.Expected, float64(f.binTrain[k])/12000) || !near(b.Actual, float64(f.binRows[k])/3000) {
				t.Errorf("%s: bin %d %+v, recomputed level %q, %d training rows, %d rows", col, k, b, f.binLevels[min(k, len(f.binLevels)-1)], f.binTrain[k], f.binRows[k])
			}
		}
		if c.PSI == nil || !near(*c.PSI, f.psi) {
			t.Errorf("%s: PSI %v, recomputed %.17g", col, c.PSI, f.psi)
		}
		// AUC of the target mean, on the new rows and the training rows.
		newAUC := pairAUC(parseFloats(t, newEnc.col(t, col+"_tmean")), newEnc.col(t, "late"), "1")
		trainAUC := pairAUC(parseFloats(t, trainEnc.col(t, col+"_tmean")), trainEnc.col(t, "late"), "1")
		recorded, _ := manifest["columns"].([]any)[i].(map[string]any)["training_score"].(float64)
		s := c.Score
		if s == nil || s.Metric != "auc" || s.Output != col+"_tmean" || s.Rows != 3000 || s.New == nil || !near(*s.New, newAUC) ||
			s.Training == nil || !near(*s.Training, trainAUC) || !near(recorded, trainAUC) || s.Change == nil || !near(*s.Change, newAUC-trainAUC) {
			t.Errorf("%s: score %+v; recomputed new %.17g, training %.17g (manifest %v)", col, s, newAUC, trainAUC, recorded)
		}
	}
	// The known shift shows: about 30% of the postcode rows unseen, none
	// of the routes.
	if s := rep.Columns[0].UnseenRowShare; s < 0.25 || s > 0.4 {
		t.Errorf("dest_postcode unseen share %g, want about 0.3", s)
	}
	if rep.Columns[2].UnseenRows != 0 {
		t.Errorf("route: %d unseen rows, want 0", rep.Columns[2].UnseenRows)
	}
	checkDriftJSONFields(t, data)
	checkDriftHTML(t, rh, cols)

	// The same rows from Parquet (text as dictionaries) report the same.
	pq := filepath.Join(dir, "new.parquet")
	copyTable(t, filepath.Join(dir, "new.csv"), pq)
	rp := filepath.Join(dir, "rp.json")
	mustRun(t, "apply", pq, "--tables", tables, "--out", filepath.Join(dir, "new_enc.parquet"), "--report", rp, "--min-level-rows", "5")
	other, err := os.ReadFile(rp)
	if err != nil {
		t.Fatal(err)
	}
	if got := strings.Replace(string(other), "new.parquet", "new.csv", 1); got != string(data) {
		t.Errorf("the Parquet input's report differs from the CSV's:\n%s\n%s", got, data)
	}
}

// copyTable copies the table at from (CSV, dest_postcode and
// sender_account read as text) to a Parquet file at to.
func copyTable(t *testing.T, from, to string) {
	t.Helper()
	r, err := tableio.Open(from, tableio.ReadOptions{})
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	w, err := tableio.Create(to, r.Schema(), tableio.WriteOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if err := table.ForEach(r, w.Write); err != nil {
		t.Fatal(err)
	}
	if err := w.Commit(); err != nil {
		t.Fatal(err)
	}
}

// checkDriftJSONFields checks that the report holds every field, each
// column and bin and listed level every one of theirs, and nothing else.
func checkDriftJSONFields(t *testing.T, data []byte) {
	t.Helper()
	var m map[string]any
	if err := json.Unmarshal(data, &m); err != nil {
		t.Fatal(err)
	}
	check := func(what string, obj any, want []string) {
		o, ok := obj.(map[string]any)
		if !ok {
			t.Errorf("%s is %T, not an object", what, obj)
			return
		}
		if got := keysOf(o); !slices.Equal(got, sorted(want...)) {
			t.Errorf("%s has the fields %v, want %v", what, got, sorted(want...))
		}
	}
	check("the report", m, []string{"tool", "file", "tables", "rows", "target", "task", "target_rows", "min_level_rows", "columns", "fail_on", "failed"})
	check("fail_on", m["fail_on"], []string{"unseen", "levels", "psi", "auc_drop", "rmse_rise"})
	for i, c := range m["columns"].([]any) {
		check("a column", c, []string{"column", "unseen_rows", "unseen_row_share", "levels", "unseen_levels", "unseen_level_share",
			"unseen_levels_capped", "unseen_rows_uncounted", "top_unseen", "unseen_levels_withheld", "psi", "psi_bins", "score"})
		cm := c.(map[string]any)
		for _, u := range cm["top_unseen"].([]any) {
			check("an unseen level", u, []string{"level", "rows"})
		}
		for _, b := range cm["psi_bins"].([]any) {
			check("a bin", b, []string{"level", "other", "training_rows", "rows", "expected", "actual"})
		}
		check("a score", cm["score"], []string{"metric", "output", "rows", "new", "training", "change"})
		if i == 0 && len(cm["top_unseen"].([]any)) == 0 {
			t.Errorf("dest_postcode lists no unseen level")
		}
	}
}

// checkDriftHTML checks the HTML report: no script, well-formed as XML,
// every column named, the formulas and their sources stated.
func checkDriftHTML(t *testing.T, path string, cols []string) {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	page := string(b)
	if strings.Contains(strings.ToLower(page), "<script") || strings.Contains(page, "http://") || strings.Contains(page, "https://") {
		t.Errorf("the HTML report holds a script or fetches something")
	}
	d := xml.NewDecoder(bytes.NewReader(b))
	d.Strict, d.Entity = true, xml.HTMLEntity
	for {
		if _, err := d.Token(); err == io.EOF {
			break
		} else if err != nil {
			t.Errorf("the HTML report is not well-formed: %v", err)
			break
		}
	}
	for _, want := range append(cols, "Siddiqi, Credit Risk Scorecards, 2006", "0.0001 (common practice)", "Hanley and McNeil", "dest_postcode_tmean") {
		if !strings.Contains(page, want) {
			t.Errorf("the HTML report does not say %q", want)
		}
	}
}

// TestApplyFailOn: figures over --fail-on thresholds give exit 7 (exitDrift)
// after the output and the report are written, one line per figure on
// stderr naming the column and the threshold, and the report lists them;
// thresholds not reached exit 0; a regression target's RMSE is held by
// rmse_rise; a bad list is a usage error before any data is read.
func TestApplyFailOn(t *testing.T) {
	dir := t.TempDir()
	writeParcelsCSV(t, filepath.Join(dir, "train.csv"), parcels.Config{Rows: 6000, Seed: 3, Postcodes: 800, Accounts: 1500}, "dest_postcode", 0)
	writeParcelsCSV(t, filepath.Join(dir, "new.csv"), parcels.Config{Rows: 1500, Seed: 3, Stream: 2, Postcodes: 800, Accounts: 1500, UnseenShare: 0.3}, "dest_postcode", 0)
	tables := filepath.Join(dir, "tables")
	mustRun(t, "encode", filepath.Join(dir, "train.csv"), "--target", "cost", "--columns", "dest_postcode,route",
		"--out", filepath.Join(dir, "train_enc.csv"), "--tables", tables)
	apply := func(report string, flags ...string) (result, map[string]any) {
		out := filepath.Join(dir, "out-"+report+".csv")
		rp := filepath.Join(dir, report)
		res := runCLI(t, append([]string{"apply", filepath.Join(dir, "new.csv"), "--tables", tables, "--out", out, "--report", rp}, flags...)...)
		if res.code != exitOK && res.code != exitDrift {
			t.Fatalf("apply %v: exit %d: %s", flags, res.code, res.stderr)
		}
		if _, err := os.Stat(out); err != nil {
			t.Errorf("apply %v: no output: %v", flags, err)
		}
		var m map[string]any
		b, err := os.ReadFile(rp)
		if err != nil {
			t.Fatal(err)
		}
		if err := json.Unmarshal(b, &m); err != nil {
			t.Fatal(err)
		}
		return res, m
	}
	_, base := apply("base.json")
	pc := base["columns"].([]any)[0].(map[string]any)
	share := pc["unseen_row_share"].(float64)
	score := pc["score"].(map[string]any)
	newE, trainE := parseFloats(t, readTable(t, filepath.Join(dir, "out-base.json.csv")).col(t, "dest_postcode_tmean")), readTable(t, filepath.Join(dir, "train_enc.csv"))
	want := rmse(parseFloats(t, readTable(t, filepath.Join(dir, "new.csv")).col(t, "cost")), newE)
	wantTrain := rmse(parseFloats(t, trainE.col(t, "cost")), parseFloats(t, trainE.col(t, "dest_postcode_tmean")))
	if score["metric"] != "rmse" || math.Abs(score["new"].(float64)-want) > 1e-9 || math.Abs(score["training"].(float64)-wantTrain) > 1e-9 {
		t.Errorf("dest_postcode score %v; recomputed RMSE new %.17g, training %.17g", score, want, wantTrain)
	}
	rise := score["change"].(float64)

	// Over: the postcode's unseen share and its RMSE rise; the route has
	// no unseen rows.
	th := share - 0.01
	res, m := apply("over.json", "--fail-on", "unseen="+strconv.FormatFloat(th, 'g', -1, 64)+",psi=100,rmse_rise=0")
	if res.code != exitDrift {
		t.Fatalf("exit %d, want %d: %s", res.code, exitDrift, res.stderr)
	}
	for _, w := range []string{`drift: column "dest_postcode": unseen`, "(--fail-on unseen=" + strconv.FormatFloat(th, 'g', -1, 64) + ")",
		"drift over --fail-on", "the output was written"} {
		if !strings.Contains(res.stderr, w) {
			t.Errorf("stderr %q does not say %q", res.stderr, w)
		}
	}
	failed := m["failed"].([]any)
	wantFailed := []any{map[string]any{"column": "dest_postcode", "measure": "unseen", "value": share, "threshold": th}}
	if rise > 0 {
		wantFailed = append(wantFailed, map[string]any{"column": "dest_postcode", "measure": "rmse_rise", "value": rise, "threshold": 0.0})
	}
	if r := m["columns"].([]any)[1].(map[string]any)["score"].(map[string]any)["change"].(float64); r > 0 {
		wantFailed = append(wantFailed, map[string]any{"column": "route", "measure": "rmse_rise", "value": r, "threshold": 0.0})
	}
	if b, _ := json.Marshal(failed); string(b) != mustJSON(t, wantFailed) {
		t.Errorf("failed %s, want %s", b, mustJSON(t, wantFailed))
	}
	if strings.Count(res.stderr, "drift: column") != len(wantFailed) {
		t.Errorf("stderr %q: want %d lines of figures over their thresholds", res.stderr, len(wantFailed))
	}
	if a, b := readFileText(t, filepath.Join(dir, "out-over.json.csv")), readFileText(t, filepath.Join(dir, "out-base.json.csv")); a != b {
		t.Errorf("the output of a run over its thresholds differs from the one without")
	}

	// Not reached: exit 0, the thresholds recorded, nothing failed.
	res, m = apply("under.json", "--fail-on", "unseen=0.99,levels=1,psi=100,auc_drop=0")
	if res.code != exitOK || len(m["failed"].([]any)) != 0 || m["fail_on"].(map[string]any)["unseen"] != 0.99 {
		t.Errorf("thresholds not reached: exit %d, failed %v, fail_on %v", res.code, m["failed"], m["fail_on"])
	}

	for _, bad := range [][]string{{"--fail-on", "unseen"}, {"--fail-on", "drift=1"}, {"--fail-on", "psi=-1"}, {"--report", "-"},
		{"--report", filepath.Join(dir, "new.csv")}, {"--report", filepath.Join(dir, "o.csv")}} {
		res := runCLI(t, append([]string{"apply", filepath.Join(dir, "new.csv"), "--tables", tables, "--out", filepath.Join(dir, "o.csv")}, bad...)...)
		if res.code != exitUsage || !strings.Contains(res.stderr, bad[0]) {
			t.Errorf("apply %v: exit %d (%q), want %d naming %s", bad, res.code, res.stderr, exitUsage, bad[0])
		}
	}
}

func rmse(y, yhat []float64) float64 {
	var s float64
	for i := range y {
		s += (yhat[i] - y[i]) * (yhat[i] - y[i])
	}
	return math.Sqrt(s / float64(len(y)))
}

func mustJSON(t *testing.T, v any) string {
	t.Helper()
	b, err := json.Marshal(v)
	if err != nil {
		t.Fatal(err)
	}
	return string(b)
}

func readFileText(t *testing.T, path string) string {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return string(b)
}

// TestExitCodeDrift: apply's drift over --fail-on is exit 7, wrapped or
// not.
func TestExitCodeDrift(t *testing.T) {
	if got := exitCode(&driftError{}); got != exitDrift || exitDrift != 7 {
		t.Errorf("exitCode(driftError) = %d, exitDrift %d; want 7", got, exitDrift)
	}
	if got := exitCode(fmt.Errorf("apply: %w", &driftError{})); got != exitDrift {
		t.Errorf("exitCode(wrapped driftError) = %d, want 7", got)
	}
}
