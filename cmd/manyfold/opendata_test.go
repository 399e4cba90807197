package main

import (
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// openData returns the path of a file of the open test data, failing (not
// skipping) when it is missing: CI fetches it with testdata/fetch.sh.
func openData(t *testing.T, name string) string {
	t.Helper()
	p := filepath.Join("..", "..", "testdata", "open", name)
	if _, err := os.Stat(p); err != nil {
		t.Fatalf("%s is missing: run bash testdata/fetch.sh (%v)", p, err)
	}
	return p
}

// TestScanZipcodes profiles the open zipcodes.csv (vega-datasets 3.2.1,
// GeoNames, CC-BY 4.0): each US postal code appears once, and codes such as
// 00501 (the first row of the file) must keep their leading zeros.
func TestScanZipcodes(t *testing.T) {
	path := openData(t, "zipcodes.csv")
	res := runCLI(t, "scan", path, "--columns", "zip_code,state", "--json", "--top", "3")
	if res.code != 0 {
		t.Fatalf("exit %d: %s", res.code, res.stderr)
	}
	var out struct {
		Columns []struct {
			Name     string `json:"name"`
			Type     string `json:"type"`
			Rows     int64  `json:"rows"`
			Distinct int64  `json:"distinct"`
			Top      []struct {
				Level string `json:"level"`
			} `json:"top"`
			Suggested string `json:"suggested"`
		} `json:"columns"`
	}
	if err := json.Unmarshal([]byte(res.stdout), &out); err != nil {
		t.Fatalf("scan --json: %v\n%s", err, res.stdout)
	}
	zip := out.Columns[0]
	if zip.Type != "text" {
		t.Errorf("zip_code type = %s, want text", zip.Type)
	}
	if zip.Rows < 40000 || zip.Distinct != zip.Rows {
		t.Errorf("zip_code: %d rows, %d distinct; want every code once", zip.Rows, zip.Distinct)
	}
	if len(zip.Top) == 0 || zip.Top[0].Level != "00501" {
		t.Errorf("first level %+v, want 00501 with its zeros (ties sort by bytes)", zip.Top)
	}
	if zip.Suggested != "drop" {
		t.Errorf("zip_code suggestion %q, want drop (an identifier)", zip.Suggested)
	}
	// 50 states, DC and territories: a few dozen levels, one code each.
	if st := out.Columns[1]; st.Distinct < 50 || st.Distinct > 70 || st.Suggested == "drop" {
		t.Errorf("state: %d distinct, suggested %q", st.Distinct, st.Suggested)
	}
}

// TestScanFlights profiles the open flights table (vega-datasets 3.2.1,
// flights-3m.parquet) with a derived target: the delay in minutes, early
// arrivals below zero, is a number and not 867 codes; the departure time is
// a time, not 213,834 levels; the target is not given an encoding, nor is
// the delay it is computed from, and the encode command names it only as
// the target.
func TestScanFlights(t *testing.T) {
	path := openData(t, "flights-3m.parquet")
	res := runCLI(t, "scan", path, "--target", "delay>15", "--json")
	if res.code != 0 {
		t.Fatalf("exit %d: %s", res.code, res.stderr)
	}
	var out struct {
		Columns []struct {
			Name      string `json:"name"`
			Suggested string `json:"suggested"`
			Reason    string `json:"reason"`
		} `json:"columns"`
		Command string `json:"encode_command"`
	}
	if err := json.Unmarshal([]byte(res.stdout), &out); err != nil {
		t.Fatalf("scan --json: %v\n%s", err, res.stdout)
	}
	want := map[string]string{"date": "time", "delay": "target", "distance": "numeric", "origin": "topk:100", "destination": "topk:100", "delay>15": "target"}
	for _, c := range out.Columns {
		if c.Suggested != want[c.Name] {
			t.Errorf("%s: suggested %s (%s), want %s", c.Name, c.Suggested, c.Reason, want[c.Name])
		}
		delete(want, c.Name)
	}
	if len(want) > 0 {
		t.Errorf("columns not profiled: %v", want)
	}
	if !strings.Contains(out.Command, "--methods origin=topk:100,destination=topk:100 ") || strings.Count(out.Command, "delay>15") != 1 {
		t.Errorf("encode command %q", out.Command)
	}
	// Without that target the delay is a number.
	res = runCLI(t, "scan", path, "--columns", "delay", "--json")
	if res.code != 0 || !strings.Contains(res.stdout, `"suggested": "numeric"`) {
		t.Errorf("scan --columns delay: exit %d, want the suggestion numeric:\n%s", res.code, res.stdout)
	}
}
