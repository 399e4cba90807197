package main

import (
	"fmt"
	"path/filepath"
	"strings"
	"testing"

	"manyfold/encoders/method"
)

// TestFlagsCheckedBeforeData: a numeric flag out of its documented range is
// a usage error (exit 2) given before the input is read, so the input here
// does not even exist (exit 3 would mean it was opened first). Before,
// --folds 100000 built a k-by-k mask and took 10 GB before failing.
func TestFlagsCheckedBeforeData(t *testing.T) {
	dir := t.TempDir()
	missing := filepath.Join(dir, "no-such-shipments.csv")
	out, tables := filepath.Join(dir, "enc.csv"), filepath.Join(dir, "tables")
	enc := []string{"encode", missing, "--target", "late", "--columns", "route", "--out", out, "--tables", tables}
	cmp := []string{"compare", missing, "--target", "late", "--columns", "route"}
	cases := []struct {
		args []string
		want string
	}{
		{append(enc, "--folds", "100000"), "--folds 100000: want 2 to 100"},
		{append(enc, "--folds", "1"), "--folds 1: want 2 to 100"},
		{append(enc, "--threads", "0"), "--threads 0: want at least 1"},
		{append(enc, "--methods", "topk:0"), fmt.Sprintf(`encoding "topk:0": K "0": want a whole number from 1 to %d`, method.MaxTopK)},
		{append(enc, "--methods", "hash:0"), fmt.Sprintf(`encoding "hash:0": B "0": want a whole number from 1 to %d`, uint64(method.MaxBuckets))},
		{append(cmp, "--threads", "0"), "--threads 0: want at least 1"},
		{append(cmp, "--threads", "-1"), "--threads -1: want at least 1"},
		{append(cmp, "--folds", "1000000"), "--folds 1000000: want 2 to 50"},
		{append(cmp, "--inner-folds", "1"), "--inner-folds 1: want 2 to 50"},
		{append(cmp, "--lambda", "-1"), "--lambda -1"},
	}
	for _, c := range cases {
		res := runCLI(t, c.args...)
		if res.code != exitUsage || !strings.Contains(res.stderr, c.want) {
			t.Errorf("%s: exit %d, %q; want exit %d naming %q", strings.Join(c.args[2:], " "), res.code, res.stderr, exitUsage, c.want)
		}
	}
}

// TestTopKHugeK: a top-k K larger than any table (2^31 with the old flag)
// once reserved room for K entries (a fatal out-of-memory); room is now
// taken for at most the levels there are. The grammar takes K up to
// method.MaxTopK and refuses more before reading anything.
func TestTopKHugeK(t *testing.T) {
	dir := t.TempDir()
	in := writeFile(t, dir, "routes.csv", "route,late\nR1,1\nR2,0\nR1,0\nR1,1\nR2,1\nR1,0\n")
	out := filepath.Join(dir, "enc.csv")
	mustRun(t, "encode", in, "--columns", "route", "--methods", fmt.Sprintf("topk:%d", method.MaxTopK),
		"--out", out, "--tables", filepath.Join(dir, "tables"))
	got := readTable(t, out).col(t, "route_topk")
	if strings.Join(got, ",") != "1,2,1,1,2,1" {
		t.Errorf("route_topk = %v, want 1,2,1,1,2,1 (R1 has the most rows)", got)
	}
	res := runCLI(t, "encode", in, "--columns", "route", "--methods", "topk:2147483648",
		"--out", filepath.Join(dir, "enc2.csv"), "--tables", filepath.Join(dir, "tables2"))
	if want := fmt.Sprintf(`K "2147483648": want a whole number from 1 to %d`, method.MaxTopK); res.code != exitUsage || !strings.Contains(res.stderr, want) {
		t.Errorf("topk:2147483648: exit %d, %q; want exit %d naming %q", res.code, res.stderr, exitUsage, want)
	}
}

// TestReviewEdges: cases found in review. A merge of shards whose origins
// differ, with a level sitting at the receiver's origin, once wrote a sum
// of squares a little below 0, which the loader then refused; a
// non-finite smoothing weight wrote tables the loader refused; apply read
// the tables before checking its flags; a target of 1e200 overflowed the
// sums of squares.
func TestReviewEdges(t *testing.T) {
	dir := t.TempDir()
	a := writeFile(t, dir, "a.csv", "k,y\nc,1.0\nc,1.0\nc,1.0\nc,1.0\n")
	b := writeFile(t, dir, "b.csv", "k,y\nb,1.1\nc,1.0\nc,1.0\nc,1.0\nc,1.0\nc,1.0\nc,1.0\n")
	for _, f := range []string{a, b} {
		mustRun(t, "encode", f, "--target", "y", "--task", "regression", "--columns", "k", "--folds", "2",
			"--out", f+".enc.csv", "--tables", f+".t")
	}
	merged := filepath.Join(dir, "merged")
	mustRun(t, "merge", a+".t", b+".t", "--tables", merged)
	mustRun(t, "apply", a, "--tables", merged, "--out", filepath.Join(dir, "app.csv"))

	cases := []struct {
		args []string
		code int
		want string
	}{
		{[]string{"encode", a, "--target", "y", "--columns", "k", "--methods", "target:m=Inf", "--out", filepath.Join(dir, "o1.csv"), "--tables", filepath.Join(dir, "t1")}, exitUsage, "m must be a finite number"},
		{[]string{"encode", a, "--target", "y", "--columns", "k", "--methods", "target:blend=NaN,1", "--out", filepath.Join(dir, "o2.csv"), "--tables", filepath.Join(dir, "t2")}, exitUsage, "finite K"},
		{[]string{"apply", a, "--tables", filepath.Join(dir, "no-such-tables"), "--out", filepath.Join(dir, "o3.csv"), "--max-field-bytes", "0"}, exitUsage, "--max-field-bytes 0"},
		{[]string{"encode", writeFile(t, dir, "huge.csv", "k,y\nc,1\nd,1e200\nc,2\n"), "--target", "y", "--task", "regression", "--columns", "k", "--folds", "2", "--out", filepath.Join(dir, "o4.csv"), "--tables", filepath.Join(dir, "t4")}, exitData, "overflow"},
	}
	for _, c := range cases {
		res := runCLI(t, c.args...)
		if res.code != c.code || !strings.Contains(res.stderr, c.want) {
			t.Errorf("%s: exit %d, %q; want exit %d naming %q", strings.Join(c.args, " "), res.code, res.stderr, c.code, c.want)
		}
	}
}
