package main

import (
	"encoding/json"
	"os"
	"path/filepath"
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
