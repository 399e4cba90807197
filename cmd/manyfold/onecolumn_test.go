package main

import (
	"path/filepath"
	"strings"
	"testing"
)

// TestOneColumnWarning: a CSV file that reads without error as one column
// whose header holds ;, tab or | gets one warning line on standard error
// naming the file and the delimiter it probably meant, from scan, from
// encode (which opens the file twice) and from apply, and from standard
// input; none with the right --delimiter or for a file of several
// columns, and none besides the error when the command fails on the file
// (the error says it).
func TestOneColumnWarning(t *testing.T) {
	dir := t.TempDir()
	rows := func(sep string) string {
		var b strings.Builder
		b.WriteString(strings.Join([]string{"city", "delay", "late"}, sep) + "\n")
		for i := 0; i < 40; i++ {
			b.WriteString(strings.Join([]string{[]string{"Paris", "Lyon", "Nice"}[i%3], "1", "0"}, sep) + "\n")
		}
		return b.String()
	}
	semi := writeFile(t, dir, "semi.csv", rows(";"))
	tab := writeFile(t, dir, "tab.csv", rows("\t"))
	pipe := writeFile(t, dir, "pipe.csv", rows("|"))
	comma := writeFile(t, dir, "comma.csv", rows(","))
	warning := func(file, header, hint string) string {
		return "warning: " + file + " reads as one column, " + header + ": did you mean --delimiter " + hint + "?\n"
	}
	count := func(stderr string) int { return strings.Count(stderr, "reads as one column") }
	for _, tc := range []struct {
		file, header, hint string
	}{
		{semi, `"city;delay;late"`, "';'"},
		{tab, `"city\tdelay\tlate"`, "tab"},
		{pipe, `"city|delay|late"`, "'|'"},
	} {
		res := mustRun(t, "scan", tc.file)
		if res.stderr != warning(tc.file, tc.header, tc.hint) {
			t.Errorf("scan %s: stderr %q, want the warning alone", tc.file, res.stderr)
		}
		if !strings.Contains(res.stdout, "city") {
			t.Errorf("scan %s printed no profile: %q", tc.file, res.stdout)
		}
	}
	for _, args := range [][]string{
		{"scan", semi, "--delimiter", ";"},
		{"scan", tab, "--delimiter", "tab"},
		{"scan", comma},
	} {
		if res := mustRun(t, args...); count(res.stderr) != 0 {
			t.Errorf("%v: %q", args, res.stderr)
		}
	}
	res := runStdin(t, []byte(rows(";")), "scan", "-")
	if res.code != exitOK || res.stderr != warning("stdin", `"city;delay;late"`, "';'") {
		t.Errorf("scan -: exit %d, stderr %q", res.code, res.stderr)
	}
	// encode spools standard input and names it as given.
	res = runStdin(t, []byte(rows(";")), "encode", "-", "--columns", "*", "--methods", "freq", "--out", filepath.Join(dir, "stdin.csv"), "--tables", filepath.Join(dir, "tstdin"))
	if res.code != exitOK || count(res.stderr) != 1 || !strings.HasSuffix(res.stderr, warning("stdin", `"city;delay;late"`, "';'")) {
		t.Errorf("encode -: exit %d, stderr %q", res.code, res.stderr)
	}
	// encode reads the file twice and warns once; apply warns too.
	out, tables := filepath.Join(dir, "enc.csv"), filepath.Join(dir, "tables")
	res = mustRun(t, "encode", semi, "--columns", "*", "--methods", "freq", "--out", out, "--tables", tables)
	if count(res.stderr) != 1 || !strings.HasSuffix(res.stderr, warning(semi, `"city;delay;late"`, "';'")) {
		t.Errorf("encode: stderr %q, want one warning last", res.stderr)
	}
	res = mustRun(t, "apply", semi, "--tables", tables, "--out", filepath.Join(dir, "app.csv"))
	if count(res.stderr) != 1 || !strings.HasSuffix(res.stderr, warning(semi, `"city;delay;late"`, "';'")) {
		t.Errorf("apply: stderr %q, want one warning last", res.stderr)
	}
	// A failure on the file says it in its error, and only there.
	res = runCLI(t, "encode", semi, "--columns", "city", "--target", "late", "--out", out, "--tables", tables)
	if res.code != exitUsage || strings.Count(res.stderr, "did you mean --delimiter ';'?") != 1 || count(res.stderr) != 0 {
		t.Errorf("encode naming a column: exit %d, stderr %q", res.code, res.stderr)
	}
}
