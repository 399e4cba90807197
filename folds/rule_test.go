package folds

import (
	"strconv"
	"strings"
	"testing"
)

// testKeys is a column of group keys; an empty string with null set is a
// null.
type testKeys struct {
	vals  []string
	nulls []bool
}

func (k testKeys) IsNull(i int) bool { return k.nulls[i] }

func (k testKeys) AppendText(dst []byte, i int) []byte {
	if k.nulls[i] {
		return dst
	}
	return append(dst, k.vals[i]...)
}

// TestParseRule: every rule of the registry parses from its syntax and
// prints back as written; unknown and malformed rules give an error that
// names the rule as written and no command-line flag.
func TestParseRule(t *testing.T) {
	good := []struct {
		in    string
		name  string
		needs Needs
	}{
		{"rows", "rows", Needs{}},
		{"stratified", "stratified", Needs{Class: true}},
		{"group=sender_account", "group", Needs{Group: "sender_account"}},
		{"group=a=b", "group", Needs{Group: "a=b"}},
		{"ordered", "ordered", Needs{Total: true}},
	}
	for _, tc := range good {
		r, err := ParseRule(tc.in)
		if err != nil {
			t.Fatalf("ParseRule(%q): %v", tc.in, err)
		}
		if r.Name() != tc.name || r.String() != tc.in || r.Needs() != tc.needs {
			t.Errorf("ParseRule(%q) = name %q, string %q, needs %+v; want %q, %q, %+v",
				tc.in, r.Name(), r.String(), r.Needs(), tc.name, tc.in, tc.needs)
		}
	}
	if len(good)-1 != len(registry) {
		t.Errorf("the test covers %d rules, the registry lists %d", len(good)-1, len(registry))
	}
	bad := []struct{ in, want string }{
		{"", "unknown"},
		{"row", "unknown (want rows, stratified, group=COL, ordered)"},
		{"Rows", "unknown"},
		{"groups=x", "unknown"},
		{"rows=3", "want rows"},
		{"ordered=time", "want ordered"},
		{"group", "want group=COL"},
		{"group=", "empty"},
	}
	for _, tc := range bad {
		_, err := ParseRule(tc.in)
		if err == nil {
			t.Errorf("ParseRule(%q): no error", tc.in)
			continue
		}
		msg := err.Error()
		if !strings.HasPrefix(msg, "fold rule "+strconv.Quote(tc.in)+": ") || !strings.Contains(msg, tc.want) {
			t.Errorf("ParseRule(%q) = %q, want it to name the rule and say %q", tc.in, msg, tc.want)
		}
		if strings.Contains(msg, "--") {
			t.Errorf("ParseRule(%q) = %q names a flag", tc.in, msg)
		}
	}
}

// assignAll runs a new assigner of rule over n rows in batches of the given
// size, starting at row number first.
func assignAll(t *testing.T, rule Rule, seed uint64, k int, total int64, first uint64, batch int, keys testKeys, cls []int32, labels []string) []int32 {
	t.Helper()
	as := rule.Assigner(seed, k, total)
	n := len(keys.vals)
	out := make([]int32, n)
	for lo := 0; lo < n; lo += batch {
		hi := min(lo+batch, n)
		b := Batch{First: first + uint64(lo), Labels: labels,
			Group: testKeys{keys.vals[lo:hi], keys.nulls[lo:hi]}}
		if cls != nil {
			b.Class = cls[lo:hi]
		}
		if err := as.Assign(b, out[lo:hi]); err != nil {
			t.Fatalf("%s: %v", rule, err)
		}
	}
	return out
}

// TestRulesMatchFunctions: each rule's assigner gives, over a few hundred
// rows cut into uneven batches, exactly the folds of the function it is
// built on (Row, Key, Stratifier.Stratum, Block), for several k and seeds.
func TestRulesMatchFunctions(t *testing.T) {
	const n = 500
	const first = 1000 // the batches do not start at row 0
	keys := testKeys{vals: make([]string, n), nulls: make([]bool, n)}
	cls := make([]int32, n)
	labels := []string{"on time", "late", "lost"}
	rng := splitmix(5)
	for i := 0; i < n; i++ {
		x := rng.next()
		keys.vals[i] = "acct-" + strconv.Itoa(int(x%37))
		keys.nulls[i] = x%11 == 0
		cls[i] = int32(x>>32%4) - 1 // -1 (unknown) to 2
	}
	group, _ := ParseRule("group=sender")
	for _, k := range []int{1, 2, 5, 7} {
		for _, seed := range []uint64{0, 3, 1 << 40} {
			for _, batch := range []int{1, 64, n} {
				got := map[string][]int32{
					"rows":                   assignAll(t, RowsRule{}, seed, k, 0, first, batch, keys, nil, nil),
					"group":                  assignAll(t, group, seed, k, 0, first, batch, keys, nil, nil),
					"stratified":             assignAll(t, StratifiedRule{}, seed, k, 0, first, batch, keys, cls, labels),
					"stratified, no classes": assignAll(t, StratifiedRule{}, seed, k, 0, first, batch, keys, nil, nil),
					"ordered":                assignAll(t, OrderedRule{}, seed, k, first+n, first, batch, keys, nil, nil),
				}
				strat := NewStratifier(seed, k)
				streams := map[int32]*Stratum{}
				for i := 0; i < n; i++ {
					row := uint64(first + i)
					key := []byte(keys.vals[i])
					if keys.nulls[i] {
						key = []byte{0xff}
					}
					sf := Row(seed, row, k)
					if c := cls[i]; c >= 0 {
						if streams[c] == nil {
							streams[c] = strat.Stratum(labels[c])
						}
						sf = streams[c].Next()
					}
					want := map[string]int{
						"rows":                   Row(seed, row, k),
						"group":                  Key(seed, key, k),
						"stratified":             sf,
						"stratified, no classes": Row(seed, row, k),
						"ordered":                Block(row, first+n, k),
					}
					for rule, w := range want {
						if int(got[rule][i]) != w {
							t.Fatalf("%s, k=%d seed=%d batch=%d, row %d: fold %d, the function gives %d",
								rule, k, seed, batch, row, got[rule][i], w)
						}
					}
				}
			}
		}
	}
}

// TestRuleErrors: an assigner refuses, naming its rule, what it cannot
// assign: ordered folds without the row count, group folds without keys, a
// class without a label. With one fold none of them needs anything.
func TestRuleErrors(t *testing.T) {
	group, _ := ParseRule("group=sender")
	out := make([]int32, 3)
	tests := []struct {
		rule Rule
		b    Batch
		want string
	}{
		{OrderedRule{}, Batch{}, `fold rule "ordered": needs the table's row count`},
		{group, Batch{}, `fold rule "group=sender": the batch carries no group keys`},
		{StratifiedRule{}, Batch{Class: []int32{0, 1, 2}, Labels: []string{"a", "b"}}, `fold rule "stratified": class 2 has no label`},
	}
	for _, tc := range tests {
		err := tc.rule.Assigner(1, 5, 0).Assign(tc.b, out)
		if err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: error %v, want %q", tc.rule, err, tc.want)
		}
		out[0] = 9
		if err := tc.rule.Assigner(1, 1, 0).Assign(tc.b, out); err != nil || out[0] != 0 {
			t.Errorf("%s with one fold: fold %d, error %v; want 0, nil", tc.rule, out[0], err)
		}
	}
}

// splitmix is a small deterministic generator for test data.
type splitmix uint64

func (s *splitmix) next() uint64 {
	*s += 0x9E3779B97F4A7C15
	z := uint64(*s)
	z = (z ^ z>>30) * 0xBF58476D1CE4E5B9
	z = (z ^ z>>27) * 0x94D049BB133111EB
	return z ^ z>>31
}
