package method_test

import (
	"fmt"
	"strings"

	"manyfold/encoders/method"
)

// Parse reads one encoding and String gives it back in canonical form:
// parameters left out take their documented defaults (target's smoothing
// eb, topk's K 100, hash's B 1024), and Needs says what the encoding
// reads beside each row's level (the target; the values themselves, for
// hashing; a hierarchical prior). An unknown method is refused with the
// registry's names, in registry order.
func ExampleParse() {
	for _, s := range []string{"target", "target:m=20:logodds", "target:eb:prior=prefix3", "topk", "hash:64:signed", "freq:share"} {
		e, err := method.Parse(s)
		if err != nil {
			fmt.Println(err)
			continue
		}
		n := e.Needs()
		fmt.Printf("%-24s %-6s target=%-5v values=%-5v prior=%+v\n", e, e.Method().Name(), n.Target, n.Values, n.Prior)
	}
	_, err := method.Parse("tgt:m=20")
	fmt.Println(err)
	// Output:
	// target:eb                target target=true  values=false prior={Prefix:0 Column:}
	// target:m=20:logodds      target target=true  values=false prior={Prefix:0 Column:}
	// target:eb:prior=prefix3  target target=true  values=false prior={Prefix:3 Column:}
	// topk:100                 topk   target=false values=false prior={Prefix:0 Column:}
	// hash:64:signed           hash   target=false values=true  prior={Prefix:0 Column:}
	// freq:share               freq   target=false values=false prior={Prefix:0 Column:}
	// encoding "tgt:m=20": unknown method "tgt" (want one of target, freq, topk, hash, woe, onehot)
}

// ParsePlan reads what a run encodes: one list joined by '+' for every
// column (the older ',' also parses; the comma of blend=K,F stays in its
// encoding), or a list per column, COLUMN=LIST joined by ','. String
// writes the canonical form, which ParsePlan reads back; mixing the two
// forms is refused.
func ExampleParsePlan() {
	for _, s := range []string{
		"target,freq",
		"target:blend=20,10+freq",
		"dest_postcode=target:eb+freq,parcel_type=topk:6",
		"dest_postcode=target,topk:6",
	} {
		p, err := method.ParsePlan(s)
		if err != nil {
			fmt.Println(err)
			continue
		}
		fmt.Println(p)
		for _, c := range p.PerColumn {
			fmt.Printf("  %s: %d encodings, %s\n", c.Column, len(c.Encodings), method.ListString(c.Encodings))
		}
	}
	// Output:
	// target:eb+freq
	// target:blend=20,10+freq
	// dest_postcode=target:eb+freq,parcel_type=topk:6
	//   dest_postcode: 2 encodings, target:eb+freq
	//   parcel_type: 1 encodings, topk:6
	// encoding "dest_postcode=target,topk:6": give every column as COLUMN=LIST, or one list for all columns, not both
}

// Help lists every registered method, its grammar on a line of its own
// (two spaces in) and then its summary; these are the grammar lines, in
// registry order (registry.go), as each method's Syntax gives them.
func ExampleHelp() {
	for _, line := range strings.Split(method.Help(), "\n") {
		if strings.HasPrefix(line, "  ") && !strings.HasPrefix(line, "   ") {
			fmt.Println(strings.TrimSpace(line))
		}
	}
	// Output:
	// target[:eb|:m=NUM|:blend=K,F][:prior=prefixN|:prior=column:COL][:logodds]
	// freq[:share]
	// topk[:K][:min=N]
	// hash[:B][:signed][:seed=S]
	// woe[:a=A]
	// onehot[:K][:min=N]
}
