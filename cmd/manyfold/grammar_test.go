package main

import (
	"path/filepath"
	"strings"
	"testing"

	"manyfold/encoders/method"
)

// TestRemovedEncodeFlags: the flags that became parameters of an encoding
// are a usage error (exit 2) whose message gives the --methods encoding
// that replaces them, with the value given, before the input is read (it
// does not exist here: exit 3 would mean it was opened first). The
// replacement parses as an encoding.
func TestRemovedEncodeFlags(t *testing.T) {
	dir := t.TempDir()
	missing := filepath.Join(dir, "no-such-shipments.csv")
	enc := []string{"encode", missing, "--target", "late", "--columns", "route",
		"--out", filepath.Join(dir, "enc.csv"), "--tables", filepath.Join(dir, "tables")}
	cases := []struct {
		flags       []string
		method, now string // the method named, the replacement
	}{
		{[]string{"--smoothing", "m=20"}, "target", "target:m=20"},
		{[]string{"--smoothing=auto"}, "target", "target:eb"},
		{[]string{"--smoothing", "blend=20,10"}, "target", "target:blend=20,10"},
		{[]string{"--prior-by", "prefix=3"}, "target", "target:eb:prior=prefix3"},
		{[]string{"--prior-by=column=route"}, "target", "target:eb:prior=column:route"},
		{[]string{"--output", "logodds"}, "target", "target:eb:logodds"},
		{[]string{"--freq", "share"}, "freq", "freq:share"},
		{[]string{"--top-k", "20"}, "topk", "topk:20"},
		{[]string{"--min-count", "5"}, "topk", "topk:100:min=5"},
		{[]string{"--buckets", "64"}, "hash", "hash:64"},
		{[]string{"--hash-seed", "3"}, "hash", "hash:1024:seed=3"},
		{[]string{"--signed"}, "hash", "hash:1024:signed"},
		// Among other flags, the first removed one is named.
		{[]string{"--methods", "target,freq", "--top-k", "7", "--signed"}, "topk", "topk:7"},
	}
	for _, c := range cases {
		res := runCLI(t, append(enc, c.flags...)...)
		name, _, _ := strings.Cut(c.flags[0], "=")
		if name == "--methods" {
			name = c.flags[2]
		}
		want := name + " is now a parameter of the " + c.method + " encoding: --methods " + c.now + " (see manyfold encode --help)"
		if res.code != exitUsage || !strings.Contains(res.stderr, want) {
			t.Errorf("%s: exit %d, %q; want exit %d and %q", strings.Join(c.flags, " "), res.code, res.stderr, exitUsage, want)
		}
		if _, err := method.ParsePlan(c.now); err != nil {
			t.Errorf("%s: the replacement %s does not parse: %v", strings.Join(c.flags, " "), c.now, err)
		}
	}
	// Without a value the message shows what the value stands for.
	res := runCLI(t, append(enc, "--smoothing")...)
	if want := "--methods target:m=NUM"; res.code != exitUsage || !strings.Contains(res.stderr, want) {
		t.Errorf("--smoothing alone: exit %d, %q; want exit %d and %q", res.code, res.stderr, exitUsage, want)
	}
	// After "--" nothing is a flag.
	res = runCLI(t, append(enc, "--", "--smoothing")...)
	if res.code != exitUsage || strings.Contains(res.stderr, "is now a parameter") {
		t.Errorf("-- --smoothing: exit %d, %q; want the usage error of a second input file", res.code, res.stderr)
	}
}

// TestLogOddsNeedsBinary: log-odds on a target that is not binary is a
// usage error from the target encoding (it was --output logodds's).
func TestLogOddsNeedsBinary(t *testing.T) {
	dir := t.TempDir()
	in := writeFile(t, dir, "shipments.csv", shipmentsCSV(40))
	res := runCLI(t, "encode", in, "--target", "cost", "--columns", "postcode", "--methods", "target:m=20:logodds",
		"--out", filepath.Join(dir, "enc.csv"), "--tables", filepath.Join(dir, "tables"))
	want := "target:m=20:logodds: log-odds needs a binary target; this one is regression"
	if res.code != exitUsage || !strings.Contains(res.stderr, want) {
		t.Errorf("exit %d, %q; want exit %d and %q", res.code, res.stderr, exitUsage, want)
	}
	if ents := dirEntries(t, dir); len(ents) != 1 {
		t.Errorf("the refused run left %v", ents)
	}
}
