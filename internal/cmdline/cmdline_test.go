package cmdline

import (
	"fmt"
	"os/exec"
	"strings"
	"testing"

	"manyfold/encoders/method"
)

func TestQuoteRoundTrip(t *testing.T) {
	// The shell's own word splitting is the reference: each argument
	// quoted, then echoed back one per line by sh, must come back as it
	// was (POSIX shell quoting rules, common practice).
	sh, err := exec.LookPath("sh")
	if err != nil {
		t.Skip("no sh here")
	}
	for _, a := range []string{"plain", "a b", "it's", "", "x;rm", "$HOME", "dest_postcode=target:eb+freq,parcel_type=topk:6", `back\slash`, "\"q\""} {
		out, err := exec.Command(sh, "-c", "printf '%s' "+Quote(a)).Output()
		if err != nil {
			t.Fatal(err)
		}
		if string(out) != a {
			t.Errorf("Quote(%q) = %s, which the shell reads as %q", a, Quote(a), out)
		}
	}
}

func ExampleEncode() {
	plan, _ := method.ParsePlan("dest_postcode=target:eb+freq,parcel_type=topk:6")
	fmt.Println(Encode("shipments.csv", "late", plan, "--fold-by", "group=sender_account"))
	// Output:
	// manyfold encode shipments.csv --target late --methods dest_postcode=target:eb+freq,parcel_type=topk:6 --fold-by group=sender_account --out shipments_encoded.csv --tables shipments_tables
}

// TestEncodeOutputsBeside: the output and tables that Encode names lie
// beside the input, never among a dataset's files (a directory or a
// pattern; package dataset), with an extension that names a format.
func TestEncodeOutputsBeside(t *testing.T) {
	plan, _ := method.ParsePlan("postcode=freq")
	dir := t.TempDir()
	cases := []struct{ file, out, tables string }{
		{"ship.csv", "ship_encoded.csv", "ship_tables"},
		{"ship", "encoded_encoded.parquet", "encoded_tables"},
		{"-", "encoded_encoded.parquet", "encoded_tables"},
		{dir, dir + "_encoded.parquet", dir + "_tables"},
		{dir + "/", dir + "_encoded.parquet", dir + "_tables"},
		{"parts/day=*/part-*.parquet", "parts_encoded.parquet", "parts_tables"},
	}
	for _, c := range cases {
		want := fmt.Sprintf("--out %s --tables %s", Quote(c.out), Quote(c.tables))
		if got := Encode(c.file, "", plan); !strings.HasSuffix(got, want) {
			t.Errorf("Encode(%q) = %s; want it to end %s", c.file, got, want)
		}
	}
}
