package main

import (
	"encoding/json"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"manyfold/internal/parcels"
)

// shellWords splits a command line as a POSIX shell does, by asking one.
func shellWords(t *testing.T, line string) []string {
	t.Helper()
	out, err := exec.Command("sh", "-c", "set -- "+line+`; for a in "$@"; do printf '%s\0' "$a"; done`).Output()
	if err != nil {
		t.Fatal(err)
	}
	return strings.Split(strings.TrimSuffix(string(out), "\x00"), "\x00")
}

// TestCompareCommandCarriesOutVerdict: compare prints the encode command
// of its verdict (text and JSON); run as it is, it encodes each column by
// its winner, which the manifest of its tables names. The candidates
// include the two methods added as one file each (woe, onehot) and a
// combination, which compare scores without an edit of its own.
func TestCompareCommandCarriesOutVerdict(t *testing.T) {
	if _, err := exec.LookPath("sh"); err != nil {
		t.Skip("no sh here")
	}
	dir := t.TempDir()
	in := filepath.Join(dir, "shipments.csv")
	if err := generate(in, parcels.Config{Rows: 20000, Seed: 5, Postcodes: 2000, Accounts: 3000}); err != nil {
		t.Fatal(err)
	}
	// The methods added as one file each, and a combination, are scored.
	all := filepath.Join(dir, "all.json")
	mustRun(t, "compare", in, "--target", "late", "--columns", "dest_postcode,parcel_type",
		"--candidates", "prior,target:eb,freq,topk:10,woe,onehot:6,target:eb+freq", "--seed", "3", "--json", all, "--folds", "3", "--inner-folds", "3")
	// Candidates far apart, so that the verdict names winners.
	js := filepath.Join(dir, "verdict.json")
	res := mustRun(t, "compare", in, "--target", "late", "--columns", "dest_postcode,parcel_type,route",
		"--candidates", "prior,target:eb,freq,hash:4", "--seed", "3", "--json", js)
	var v struct {
		EncodeCommand string `json:"encode_command"`
		Columns       []struct {
			Column     string `json:"column"`
			Candidates []struct {
				Name    string `json:"name"`
				Winner  bool   `json:"winner"`
				Primary struct {
					Mean float64 `json:"mean"`
				} `json:"primary"`
			} `json:"candidates"`
		} `json:"columns"`
	}
	b, err := os.ReadFile(all)
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(b, &v); err != nil {
		t.Fatal(err)
	}
	for _, c := range v.Columns {
		if len(c.Candidates) != 7 {
			t.Fatalf("%s: %d candidates scored, want 7", c.Column, len(c.Candidates))
		}
		for _, k := range c.Candidates {
			if math.IsNaN(k.Primary.Mean) || k.Primary.Mean < 0.4 || k.Primary.Mean > 1 {
				t.Errorf("%s, %s: AUC %v", c.Column, k.Name, k.Primary.Mean)
			}
		}
	}
	v.Columns = nil
	if b, err = os.ReadFile(js); err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(b, &v); err != nil {
		t.Fatal(err)
	}
	if v.EncodeCommand == "" || !strings.Contains(res.stdout, v.EncodeCommand) {
		t.Fatalf("encode command %q, not printed in the text:\n%s", v.EncodeCommand, res.stdout)
	}
	winners := map[string]string{}
	for _, c := range v.Columns {
		for _, k := range c.Candidates {
			if k.Winner {
				winners[c.Column] = k.Name
			}
		}
	}
	if len(winners) == 0 {
		t.Fatalf("no column has a clear winner:\n%s", res.stdout)
	}
	args := shellWords(t, v.EncodeCommand)
	if args[0] != "manyfold" || args[1] != "encode" {
		t.Fatalf("command %q", v.EncodeCommand)
	}
	mustRun(t, args[1:]...)
	encoded := manifestEncodings(t, filepath.Join(dir, "shipments_tables"))
	for col, encs := range encoded {
		if encs != winners[col] {
			t.Errorf("%s encoded as %s; compare's winner is %s", col, encs, winners[col])
		}
	}
	if len(encoded) != len(winners) {
		t.Errorf("%d columns encoded, want the %d with a winner", len(encoded), len(winners))
	}
	t.Logf("winners %v; command: %s", winners, v.EncodeCommand)
}

// TestScanCommandCarriesOutSuggestions: scan ends with the encode command
// of its suggestions; run as it is, it encodes each suggested column as
// suggested, leaving out the target and the columns to drop.
func TestScanCommandCarriesOutSuggestions(t *testing.T) {
	if _, err := exec.LookPath("sh"); err != nil {
		t.Skip("no sh here")
	}
	dir := t.TempDir()
	in := filepath.Join(dir, "shipments.parquet")
	if err := generate(in, parcels.Config{Rows: 5000, Seed: 2, Postcodes: 800, Accounts: 1500}); err != nil {
		t.Fatal(err)
	}
	res := mustRun(t, "scan", in, "--target", "late")
	suggested := map[string]string{}
	var name, command string
	lines := strings.Split(res.stdout, "\n")
	for i, l := range lines {
		if f := strings.Fields(l); len(f) > 1 && !strings.HasPrefix(l, " ") && strings.HasPrefix(f[1], "[") {
			name = f[0]
		}
		if s, ok := strings.CutPrefix(l, "  suggested: "); ok {
			suggested[name], _, _ = strings.Cut(s, " ")
		}
		if l == "to encode as suggested:" && i+1 < len(lines) {
			command = strings.TrimSpace(lines[i+1])
		}
	}
	if command == "" || len(suggested) < 6 {
		t.Fatalf("no encode command, or suggestions for %d columns, in:\n%s", len(suggested), res.stdout)
	}
	args := shellWords(t, command)
	mustRun(t, args[1:]...)
	encoded := manifestEncodings(t, filepath.Join(dir, "shipments_tables"))
	for col, encs := range encoded {
		if encs != suggested[col] {
			t.Errorf("%s encoded as %s; scan suggested %s", col, encs, suggested[col])
		}
	}
	for col, s := range suggested {
		want := col != "late" && s != "drop" && s != "numeric"
		if _, ok := encoded[col]; ok != want {
			t.Errorf("%s (suggested %s): encoded %v, want %v", col, s, ok, want)
		}
	}
}

// manifestEncodings reads the manifest of a tables directory: each
// column's encodings, joined by '+'.
func manifestEncodings(t *testing.T, dir string) map[string]string {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(dir, "manifest.json"))
	if err != nil {
		t.Fatal(err)
	}
	var mf struct {
		Columns []struct {
			Name      string `json:"name"`
			Encodings []struct {
				Encoding string `json:"encoding"`
			} `json:"encodings"`
		} `json:"columns"`
	}
	if err := json.Unmarshal(b, &mf); err != nil {
		t.Fatal(err)
	}
	out := map[string]string{}
	for _, c := range mf.Columns {
		var encs []string
		for _, e := range c.Encodings {
			encs = append(encs, e.Encoding)
		}
		out[c.Name] = strings.Join(encs, "+")
	}
	return out
}

// TestCompareHelpStatesVerdict: compare's help says how the verdict is
// reached (the test, its interval, the winner's rule, null when none) and
// that the output ends with the encode command.
func TestCompareHelpStatesVerdict(t *testing.T) {
	res := runCLI(t, "compare", "--help")
	help := strings.Join(strings.Fields(res.stdout), " ")
	for _, want := range []string{"corrected resampled t-test", "95% interval", "p-value", "the simplest candidate the test cannot tell from the best", "only when it beats the prior", `"no clear winner"`, "winner is null", "ends with the manyfold encode command"} {
		if !strings.Contains(help, want) {
			t.Errorf("compare's help lacks %q", want)
		}
	}
}
