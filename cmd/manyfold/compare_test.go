package main

import (
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"manyfold/internal/parcels"
)

// TestCompareSameSeed: the same seed gives a byte-identical table on
// stdout and byte-identical JSON (fit times are recorded only with --timings).
func TestCompareSameSeed(t *testing.T) {
	dir := t.TempDir()
	file := filepath.Join(dir, "shipments.parquet")
	if err := generate(file, parcels.Config{Rows: 20000, Seed: 3, Postcodes: 2000, Accounts: 4000}); err != nil {
		t.Fatal(err)
	}
	args := func(out string) []string {
		return []string{"compare", file, "--target", "late", "--columns", "dest_postcode,sender_account",
			"--folds", "3", "--inner-folds", "3", "--seed", "8", "--json", out}
	}
	a := mustRun(t, args(filepath.Join(dir, "a.json"))...)
	b := mustRun(t, append(args(filepath.Join(dir, "b.json")), "--threads", "1")...)
	if a.stdout != b.stdout {
		t.Errorf("same seed, different tables:\n%s\n---\n%s", a.stdout, b.stdout)
	}
	ja, err := os.ReadFile(filepath.Join(dir, "a.json"))
	if err != nil {
		t.Fatal(err)
	}
	jb, _ := os.ReadFile(filepath.Join(dir, "b.json"))
	if string(ja) != string(jb) {
		t.Error("same seed, different JSON")
	}
	var res struct {
		Task    string `json:"task"`
		Metric  string `json:"metric"`
		Columns []struct {
			Column     string `json:"column"`
			Candidates []struct {
				Name   string `json:"name"`
				Winner bool   `json:"winner"`
			} `json:"candidates"`
		} `json:"columns"`
	}
	if err := json.Unmarshal(ja, &res); err != nil {
		t.Fatal(err)
	}
	if res.Task != "binary" || res.Metric != "auc" || len(res.Columns) != 2 || len(res.Columns[0].Candidates) != 7 {
		t.Errorf("JSON: %+v", res)
	}
	for _, want := range []string{"== dest_postcode:", "== sender_account:", "reading: ", "prior (baseline)", "target:insample (baseline)", "baselines (not ranked):"} {
		if !strings.Contains(a.stdout, want) {
			t.Errorf("table lacks %q:\n%s", want, a.stdout)
		}
	}
	// Each column has a winner or says that none is clear.
	if strings.Count(a.stdout, "<- winner")+strings.Count(a.stdout, "reading: no clear winner") != 2 {
		t.Errorf("want a winner or no clear winner per column:\n%s", a.stdout)
	}
}

// TestCompareCSVAndReport: CSV input (counted for --sample), standard
// input, the HTML report, and the error exits.
func TestCompareCSVAndReport(t *testing.T) {
	dir := t.TempDir()
	csv := writeFile(t, dir, "ship.csv", shipmentsCSV(600))
	report := filepath.Join(dir, "r.html")
	res := mustRun(t, "compare", csv, "--target", "late", "--columns", "postcode,sender", "--folds", "2",
		"--inner-folds", "2", "--sample", "300", "--candidates", "prior,target:m=5,topk:5", "--report", report)
	if !strings.Contains(res.stdout, "target:m=5") || strings.Contains(res.stdout, "hash:") {
		t.Errorf("candidates not as asked:\n%s", res.stdout)
	}
	if fi, err := os.Stat(report); err != nil || fi.Size() == 0 {
		t.Errorf("report: %v", err)
	}
	in, _ := os.ReadFile(csv)
	st := runStdin(t, in, "compare", "-", "--target", "late", "--columns", "postcode", "--folds", "2", "--inner-folds", "2")
	if st.code != exitOK || !strings.Contains(st.stdout, "stdin") {
		t.Errorf("stdin: exit %d\n%s%s", st.code, st.stdout, st.stderr)
	}
	for _, tc := range []struct {
		args []string
		code int
		want string
	}{
		{[]string{"compare", csv, "--columns", "postcode"}, exitUsage, "--target"},
		{[]string{"compare", csv, "--target", "late", "--columns", "postcod"}, exitUsage, "postcode"},
		{[]string{"compare", csv, "--target", "late", "--columns", "postcode", "--candidates", "onehots"}, exitUsage, "onehots"},
		{[]string{"compare", csv, "--target", "late", "--columns", "postcode", "--folds", "1"}, exitUsage, "--folds"},
		{[]string{"compare", csv, "--target", "late", "--columns", "postcode", "--json", filepath.Join(dir, "no", "x.json")}, exitOutput, "x.json"},
		{[]string{"compare", filepath.Join(dir, "missing.csv"), "--target", "late", "--columns", "postcode"}, exitInput, "missing.csv"},
	} {
		r := runCLI(t, tc.args...)
		if r.code != tc.code || !strings.Contains(r.stderr, tc.want) {
			t.Errorf("%v: exit %d, stderr %q; want exit %d mentioning %q", tc.args[1:], r.code, r.stderr, tc.code, tc.want)
		}
	}
}

// TestCompareFoldBy: --fold-by picks the rule of compare's outer and inner
// folds, the table and the JSON say which, and the rules compare cannot
// follow are usage errors.
func TestCompareFoldBy(t *testing.T) {
	dir := t.TempDir()
	csv := writeFile(t, dir, "ship.csv", shipmentsCSV(600))
	out := filepath.Join(dir, "r.json")
	res := mustRun(t, "compare", csv, "--target", "late", "--columns", "postcode", "--folds", "2", "--inner-folds", "2",
		"--fold-by", "group=sender", "--json", out)
	if !strings.Contains(res.stdout, "2 outer x 2 inner folds (fold rule group=sender)") {
		t.Errorf("the table does not say the fold rule:\n%s", res.stdout)
	}
	js, err := os.ReadFile(out)
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(string(js), `"fold_by": "group=sender"`) {
		t.Errorf("JSON lacks fold_by:\n%s", js)
	}
	base := []string{"compare", csv, "--columns", "postcode", "--folds", "2", "--inner-folds", "2"}
	for _, tc := range []struct {
		args []string
		want string
	}{
		{[]string{"--target", "late", "--fold-by", "senders"}, `--fold-by: fold rule "senders": unknown (want rows, stratified, group=COL, ordered)`},
		{[]string{"--target", "late", "--fold-by", "group="}, `--fold-by: fold rule "group=": the group column's name is empty`},
		{[]string{"--target", "late", "--fold-by", "ordered"}, `fold rule "ordered": compare cannot follow it`},
		{[]string{"--target", "cost", "--fold-by", "stratified"}, `fold rule "stratified": target "cost" is a regression target`},
		{[]string{"--target", "late", "--fold-by", "group=sendr"}, `"sendr"`},
	} {
		r := runCLI(t, append(base, tc.args...)...)
		if r.code != exitUsage || !strings.Contains(r.stderr, tc.want) {
			t.Errorf("%v: exit %d, stderr %q; want exit %d mentioning %q", tc.args, r.code, r.stderr, exitUsage, tc.want)
		}
	}
}
