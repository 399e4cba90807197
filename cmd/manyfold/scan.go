package main

import (
	"fmt"
	"os"
	"strings"

	"manyfold/encoders/method"
	"manyfold/encoders/pipeline"
	"manyfold/internal/cmdline"
	"manyfold/internal/jsonout"
	"manyfold/io/derive"
	"manyfold/io/pqio"
	"manyfold/io/tableio"
)

const scanUsage = `Usage: manyfold scan FILE [--columns a,b] [--target COL] [--top N] [--json]

Profiles the columns of FILE (all, or those given) as categorical columns:
type, rows, nulls, exact distinct count, the most frequent levels, the share
of levels seen once, the share of rows the top 10 / 100 / 1000 levels cover,
and a suggested encoding with its reason, in encode's grammar. It ends with
the manyfold encode command that carries out the suggestions (with --target,
the target column is left out of them and named in the command). Memory
grows with the number of distinct levels, not with the rows.
`

func runScan(args []string) error {
	fs := newFlags("scan", scanUsage)
	var in inputFlags
	in.add(fs)
	columns := fs.StringSlice("columns", nil, "columns to profile, comma separated: names, patterns (dest_*, !dest_city) and crosses (origin*destination) (default: all)")
	top := fs.Int("top", 5, "how many of the most frequent levels to list")
	target := fs.String("target", "", "the target column: left out of the suggestions, named in the encode command")
	asJSON := fs.Bool("json", false, "print JSON instead of text")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if fs.NArg() != 1 {
		return usagef("scan takes one input file (see manyfold scan --help)")
	}
	file := fs.Arg(0)
	ropts, err := in.options()
	if err != nil {
		return err
	}
	r, err := tableio.Open(file, ropts)
	if err != nil {
		return err
	}
	names, err := derive.Expand(*columns, r.Schema())
	if err != nil {
		r.Close()
		return usagef("--columns: %v", err)
	}
	wr, err := derive.Wrap(r, append(names, *target))
	if err != nil {
		r.Close()
		return usagef("%s: %v", file, err)
	}
	r = wr
	defer r.Close()
	s := r.Schema()
	if *target != "" {
		if _, err := selectColumns(file, "--target", s, []string{*target}); err != nil {
			return err
		}
	}
	// Nested columns (lists, maps, structs) are listed as not encodable
	// when every column is profiled.
	nested := nestedOf(r)
	if err := refuseNested(file, "--columns", "profiled or encoded", nested, names...); err != nil {
		return err
	}
	if len(names) == 0 {
		names = s.Names()
	} else {
		nested = nil
	}
	idx, err := selectColumns(file, "--columns", s, names)
	if err != nil {
		return err
	}
	if err := r.Select(idx); err != nil {
		return err
	}
	sel := make([]int, len(idx))
	for i := range sel {
		sel[i] = i
	}
	pr := newProgress("scan", r)
	profiles, err := pipeline.Scan(r, sel, *top, pr.update)
	err = locate(err, r)
	pr.done()
	if err != nil {
		return err
	}
	pipeline.MarkTarget(profiles, *target, derive.Sources(*target)...)
	command := ""
	if plan := pipeline.SuggestedPlan(profiles, *target); plan.PerColumn != nil {
		t := *target
		if t == "" && needsTarget(plan) {
			t = "TARGET"
		}
		command = cmdline.Encode(file, t, plan)
	}
	if *asJSON {
		doc := map[string]any{"file": file, "columns": profiles, "encode_command": command}
		if len(nested) > 0 {
			doc["not_encodable"] = notEncodable(nested)
		}
		b, err := jsonout.Marshal(doc)
		if err != nil {
			return err
		}
		_, err = os.Stdout.Write(b)
		return err
	}
	printProfiles(profiles)
	printNested(nested)
	if command != "" {
		fmt.Printf("\nto encode as suggested:\n  %s\n", command)
		if *target == "" && strings.Contains(command, "TARGET") {
			fmt.Println("  (TARGET: name the target column, or give scan --target)")
		}
	}
	return nil
}

// needsTarget reports whether an encoding of the plan reads the target.
func needsTarget(p method.Plan) bool {
	for _, c := range p.PerColumn {
		for _, e := range c.Encodings {
			if e.Needs().Target {
				return true
			}
		}
	}
	return false
}

// nestedNote says why a nested column is not encodable.
const nestedNote = "a nested column: not encodable; copied as it is into a Parquet output"

// notEncodable lists nested columns for scan's JSON output.
func notEncodable(nested []pqio.Nested) []map[string]string {
	var out []map[string]string
	for _, n := range nested {
		out = append(out, map[string]string{"name": n.Name, "type": n.Kind, "reason": nestedNote})
	}
	return out
}

// printNested lists nested columns after the profiles.
func printNested(nested []pqio.Nested) {
	var b strings.Builder
	for _, n := range nested {
		fmt.Fprintf(&b, "\n%s  [%s]  %s\n", n.Name, n.Kind, nestedNote)
	}
	os.Stdout.WriteString(b.String())
}

func printProfiles(ps []pipeline.Profile) {
	var b strings.Builder
	for i, p := range ps {
		if i > 0 {
			b.WriteString("\n")
		}
		fmt.Fprintf(&b, "%s  [%s]  %d rows, %d null (%.1f%%), %d distinct, %.1f%% of levels seen once\n",
			p.Name, p.Type, p.Rows, p.Nulls, pct(p.Nulls, p.Rows), p.Distinct, 100*p.SeenOnce)
		fmt.Fprintf(&b, "  rows in the top 10 / 100 / 1000 levels: %.1f%% / %.1f%% / %.1f%%\n", 100*p.Cover10, 100*p.Cover100, 100*p.Cover1000)
		if len(p.Top) > 0 {
			b.WriteString("  most frequent:")
			for j, t := range p.Top {
				if j > 0 {
					b.WriteString(",")
				}
				fmt.Fprintf(&b, " %q %d (%.1f%%)", t.Level, t.Rows, 100*t.Share)
			}
			b.WriteString("\n")
		}
		fmt.Fprintf(&b, "  suggested: %s\n  why: %s\n", p.Suggest, p.Reason)
	}
	os.Stdout.WriteString(b.String())
}

func pct(a, b int64) float64 {
	if b == 0 {
		return 0
	}
	return 100 * float64(a) / float64(b)
}
