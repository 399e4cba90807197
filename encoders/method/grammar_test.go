package method

import (
	"errors"
	"strings"
	"testing"

	"manyfold/encoders/colstats"
)

// TestParseSmoothing parses the smoothings of a target encoding: eb (the
// empirical-Bayes m, which replaced the name auto), m=NUM and blend=K,F.
func TestParseSmoothing(t *testing.T) {
	cases := []struct {
		in   string
		want colstats.Smoothing
		ok   bool
	}{
		{"eb", colstats.Smoothing{Kind: colstats.SmoothEB}, true},
		{"m=20", colstats.Smoothing{Kind: colstats.SmoothM, M: 20}, true},
		{"m=0.5", colstats.Smoothing{Kind: colstats.SmoothM, M: 0.5}, true},
		{"m=0", colstats.Smoothing{Kind: colstats.SmoothM, M: 0}, true},
		{"blend=20,10", colstats.Smoothing{Kind: colstats.SmoothBlend, K: 20, F: 10}, true},
		{"blend=-3,0", colstats.Smoothing{Kind: colstats.SmoothBlend, K: -3, F: 0}, true},
		{"auto", colstats.Smoothing{}, false},
		{"m=-1", colstats.Smoothing{}, false},
		{"m=x", colstats.Smoothing{}, false},
		{"m=Inf", colstats.Smoothing{}, false},
		{"m=NaN", colstats.Smoothing{}, false},
		{"blend=3", colstats.Smoothing{}, false},
		{"blend=3,-1", colstats.Smoothing{}, false},
		{"blend=NaN,1", colstats.Smoothing{}, false},
		{"shrink", colstats.Smoothing{}, false},
	}
	for _, c := range cases {
		got, err := ParseSmoothing(c.in)
		if (err == nil) != c.ok || (c.ok && got != c.want) {
			t.Errorf("ParseSmoothing(%q) = %+v, %v", c.in, got, err)
		}
	}
}

// TestParseCanonical parses encodings in every form the grammar accepts
// and checks their canonical text, and that the canonical text parses back
// to itself.
func TestParseCanonical(t *testing.T) {
	cases := []struct {
		in, method, want string
	}{
		{"target", "target", "target:eb"},
		{"target:eb", "target", "target:eb"},
		{" target:eb ", "target", "target:eb"},
		{"target:m=20", "target", "target:m=20"},
		{"target:m=20.0", "target", "target:m=20"},
		{"target:m=0.5:logodds", "target", "target:m=0.5:logodds"},
		{"target:logodds:m=5", "target", "target:m=5:logodds"},
		{"target:blend=20,10", "target", "target:blend=20,10"},
		{"target:blend=2.5,0", "target", "target:blend=2.5,0"},
		{"target:eb:prior=prefix3", "target", "target:eb:prior=prefix3"},
		{"target:prior=prefix3", "target", "target:eb:prior=prefix3"},
		{"target:prior=column:region", "target", "target:eb:prior=column:region"},
		{"target:logodds:prior=column:region:m=2", "target", "target:m=2:prior=column:region:logodds"},
		{"freq", "freq", "freq"},
		{"freq:share", "freq", "freq:share"},
		{"topk", "topk", "topk:100"},
		{"topk:6", "topk", "topk:6"},
		{"topk:min=5", "topk", "topk:100:min=5"},
		{"topk:100:min=5", "topk", "topk:100:min=5"},
		{"topk:6:min=1", "topk", "topk:6"},
		{"hash", "hash", "hash:1024"},
		{"hash:64", "hash", "hash:64"},
		{"hash:signed:seed=3", "hash", "hash:1024:signed:seed=3"},
		{"hash:64:seed=3:signed", "hash", "hash:64:signed:seed=3"},
		{"hash:1024:seed=0", "hash", "hash:1024"},
	}
	for _, c := range cases {
		e, err := Parse(c.in)
		if err != nil {
			t.Errorf("Parse(%q): %v", c.in, err)
			continue
		}
		if got := e.String(); got != c.want {
			t.Errorf("Parse(%q).String() = %q, want %q", c.in, got, c.want)
		}
		if got := e.Method().Name(); got != c.method {
			t.Errorf("Parse(%q) is of method %q, want %q", c.in, got, c.method)
		}
		back, err := Parse(e.String())
		if err != nil {
			t.Errorf("Parse(%q), the canonical text of %q: %v", e.String(), c.in, err)
			continue
		}
		if back.String() != e.String() {
			t.Errorf("%q parses to %q, which parses to %q", c.in, e.String(), back.String())
		}
	}
}

// TestParsePlan parses lists and plans: one list for every column, joined
// by '+' (or ',', the old form), with blend's comma kept inside its
// encoding, and per-column lists; the plan's text parses back to itself.
func TestParsePlan(t *testing.T) {
	type col struct {
		name string
		list string // the column's encodings in canonical text
	}
	cases := []struct {
		in   string
		all  string // canonical text of the list for every column
		per  []col  // or the per-column lists
		text string // the plan's String()
	}{
		{in: "target:eb+freq", all: "target:eb+freq", text: "target:eb+freq"},
		{in: "target,freq", all: "target:eb+freq", text: "target:eb+freq"},
		{in: "target , freq:share", all: "target:eb+freq:share", text: "target:eb+freq:share"},
		{in: "target:blend=20,10+freq", all: "target:blend=20,10+freq", text: "target:blend=20,10+freq"},
		{in: "target:blend=20,10,freq", all: "target:blend=20,10+freq", text: "target:blend=20,10+freq"},
		{in: "freq+target:blend=20,10", all: "freq+target:blend=20,10", text: "freq+target:blend=20,10"},
		{in: "topk+hash+freq+target", all: "topk:100+hash:1024+freq+target:eb", text: "topk:100+hash:1024+freq+target:eb"},
		{
			in:   "a=target:blend=20,10+freq,b=topk:6",
			per:  []col{{"a", "target:blend=20,10+freq"}, {"b", "topk:6"}},
			text: "a=target:blend=20,10+freq,b=topk:6",
		},
		{
			in:   "dest_postcode=target+freq,parcel_type=topk:6",
			per:  []col{{"dest_postcode", "target:eb+freq"}, {"parcel_type", "topk:6"}},
			text: "dest_postcode=target:eb+freq,parcel_type=topk:6",
		},
		{
			in:   "route=target:eb:prior=column:region, region=hash",
			per:  []col{{"route", "target:eb:prior=column:region"}, {"region", "hash:1024"}},
			text: "route=target:eb:prior=column:region,region=hash:1024",
		},
	}
	for _, c := range cases {
		p, err := ParsePlan(c.in)
		if err != nil {
			t.Errorf("ParsePlan(%q): %v", c.in, err)
			continue
		}
		if c.per == nil {
			if p.PerColumn != nil || ListString(p.All) != c.all {
				t.Errorf("ParsePlan(%q): every column %q, per column %v; want every column %q", c.in, ListString(p.All), p.PerColumn, c.all)
			}
			list, err := ParseList(c.in)
			if err != nil || ListString(list) != c.all {
				t.Errorf("ParseList(%q) = %q, %v; want %q", c.in, ListString(list), err, c.all)
			}
		} else {
			if p.All != nil || len(p.PerColumn) != len(c.per) {
				t.Errorf("ParsePlan(%q): every column %q, %d per-column lists; want %d", c.in, ListString(p.All), len(p.PerColumn), len(c.per))
				continue
			}
			for i, w := range c.per {
				got := p.PerColumn[i]
				if got.Column != w.name || ListString(got.Encodings) != w.list {
					t.Errorf("ParsePlan(%q): column %d is %q=%q, want %q=%q", c.in, i, got.Column, ListString(got.Encodings), w.name, w.list)
				}
			}
		}
		if got := p.String(); got != c.text {
			t.Errorf("ParsePlan(%q).String() = %q, want %q", c.in, got, c.text)
		}
		back, err := ParsePlan(p.String())
		if err != nil || back.String() != p.String() {
			t.Errorf("ParsePlan(%q), the text of %q: %q, %v", p.String(), c.in, back.String(), err)
		}
	}
}

// TestParseErrors checks that a wrong encoding, list or plan is refused
// with an Error that quotes the text and says what is wrong.
func TestParseErrors(t *testing.T) {
	cases := []struct {
		parse string // Parse, ParseList or ParsePlan
		in    string
		want  []string // in the message
	}{
		{"Parse", "shrink", []string{`encoding "shrink"`, `unknown method "shrink"`}},
		{"Parse", "Target", []string{`unknown method "Target"`}},
		{"Parse", "", []string{`unknown method ""`}},
		{"Parse", "freq:x", []string{`encoding "freq:x"`, "freq:share"}},
		{"Parse", "freq:share:share", []string{"freq:share"}},
		{"Parse", "target:m=-1", []string{`encoding "target:m=-1"`, "m=-1", ">= 0"}},
		{"Parse", "target:m=", []string{"m="}},
		{"Parse", "target:blend=3", []string{`encoding "target:blend=3"`, "blend=K,F"}},
		{"Parse", "target:eb:m=20", []string{"two smoothings"}},
		{"Parse", "target:m=20:blend=2,1", []string{"two smoothings"}},
		{"Parse", "target:prior=prefix2:prior=column:region", []string{"two priors"}},
		{"Parse", "target:prior=prefix0", []string{"prior=prefix0"}},
		{"Parse", "target:prior=column", []string{"prior=column"}},
		{"Parse", "target:auto", []string{`unknown parameter "auto"`}},
		{"Parse", "topk:0", []string{`encoding "topk:0"`, "K"}},
		{"Parse", "topk:ten", []string{`unknown parameter "ten"`}},
		{"Parse", "topk:min=0", []string{"min"}},
		{"Parse", "hash:0", []string{`encoding "hash:0"`, "B"}},
		{"Parse", "hash:seed=-1", []string{"seed"}},
		{"Parse", "hash:64:unsigned", []string{`unknown parameter "unsigned"`}},
		{"Parse", "hash:64:signed:signed", []string{`"signed" is given twice`}},
		{"Parse", "hash:seed=1:seed=2", []string{`"seed" is given twice`}},
		{"Parse", "topk:5:min=2:min=3", []string{`"min" is given twice`}},
		{"Parse", "onehot:5:min=2:min=3", []string{`"min" is given twice`}},
		{"Parse", "woe:a=1:a=2", []string{`"a" is given twice`}},
		{"Parse", "woe:a=0", []string{"a=A with a finite A > 0"}},
		{"Parse", "target:logodds:logodds", []string{"logodds is given twice"}},
		{"ParseList", "target+freq+target:m=20", []string{"target is listed twice", "target:eb", "target:m=20"}},
		{"ParseList", "freq,freq:share", []string{"freq is listed twice"}},
		{"ParseList", "+", []string{"no encoding"}},
		{"ParseList", "target+shrink", []string{`unknown method "shrink"`}},
		{"ParsePlan", "", []string{"no encoding"}},
		{"ParsePlan", "freq+freq", []string{"freq is listed twice"}},
		{"ParsePlan", "a=target:eb,freq", []string{"COLUMN=LIST", "not both"}},
		{"ParsePlan", "freq,a=topk", []string{"not both"}},
		{"ParsePlan", "a=freq,a=topk", []string{`column "a" is named twice`}},
		{"ParsePlan", "a=freq,b=target:blend=3", []string{"blend=K,F"}},
		{"ParsePlan", "a=freq,b=", []string{"no encoding"}},
		{"ParsePlan", "a=freq+freq", []string{"freq is listed twice"}},
	}
	for _, c := range cases {
		var err error
		switch c.parse {
		case "Parse":
			_, err = Parse(c.in)
		case "ParseList":
			_, err = ParseList(c.in)
		case "ParsePlan":
			_, err = ParsePlan(c.in)
		}
		if err == nil {
			t.Errorf("%s(%q) succeeded", c.parse, c.in)
			continue
		}
		var pe *Error
		if !errors.As(err, &pe) {
			t.Errorf("%s(%q): %T is not an *Error: %v", c.parse, c.in, err, err)
		}
		msg := err.Error()
		for _, w := range c.want {
			if !strings.Contains(msg, w) {
				t.Errorf("%s(%q): message %q does not say %q", c.parse, c.in, msg, w)
			}
		}
	}
}

// TestUnknownMethodListsKnown checks that an unknown method's message lists
// every registered method.
func TestUnknownMethodListsKnown(t *testing.T) {
	_, err := Parse("shrink:eb")
	if err == nil {
		t.Fatal("an unknown method parsed")
	}
	for _, n := range Names() {
		if !strings.Contains(err.Error(), n) {
			t.Errorf("message %q does not list the method %q", err, n)
		}
	}
	if len(Names()) < 4 {
		t.Errorf("only %d methods registered: %v", len(Names()), Names())
	}
}
