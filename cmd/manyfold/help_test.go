package main

import (
	"os"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"testing"
)

// flagBlocks returns the help of each flag in a command's help text: its
// line and the lines its help wraps onto, by flag name.
func flagBlocks(t *testing.T, help string) map[string]string {
	t.Helper()
	_, flags, ok := strings.Cut(help, "\nFlags:\n")
	if !ok {
		t.Fatalf("no Flags section in:\n%s", help)
	}
	flags, _, _ = strings.Cut(flags, "\n\n")
	blocks := map[string]string{}
	name := ""
	for _, line := range strings.Split(flags, "\n") {
		if m := regexp.MustCompile(`^  --([a-z-]+)`).FindStringSubmatch(line); m != nil {
			name = m[1]
		} else if name == "" || !strings.HasPrefix(line, "   ") {
			t.Fatalf("stray line in the flags: %q", line)
		}
		blocks[name] += strings.TrimSpace(line) + " "
	}
	return blocks
}

// TestHelpDefaults: in every command's help every flag shows its default
// ("(default 5)", "(default \"rows\")", "(default: none)" for an empty text
// or list, or its help's own "(default: ...)"), and the flags a command
// cannot run without say "(required)" instead; no line passes 80 columns.
func TestHelpDefaults(t *testing.T) {
	spot := map[string]map[string]string{
		"encode":  {"folds": "(default 5)", "fold-by": `(default "rows")`, "seed": "(default 0)", "no-header": "(default false)", "fold-column": "(default: none)", "task": "(default: detected from the target)", "out": "(required)", "tables": "(required)"},
		"apply":   {"tables": "(required)", "out": "(required)", "format": "(default: from --out's extension)"},
		"compare": {"target": "(required)", "columns": "(required)", "inner-folds": "(default 5)", "sample": "(default 200000)", "with": "(default: none)"},
		"merge":   {"tables": "(required)", "min-level-rows": "(default 0)"},
		"scan":    {"top": "(default 5)", "columns": "(default: all)", "json": "(default false)"},
		"demo":    {"rows": "(default 200000)", "dir": `(default "manyfold-demo")`},
	}
	for _, c := range commands {
		res := runCLI(t, c.name, "--help")
		if res.code != exitOK {
			t.Fatalf("%s --help: exit %d", c.name, res.code)
		}
		blocks := flagBlocks(t, res.stdout)
		if len(blocks) < 2 {
			t.Errorf("%s: %d flags in its help", c.name, len(blocks))
		}
		for name, text := range blocks {
			required := slices.Contains(requiredFlags[c.name], name)
			if required != strings.Contains(text, "(required)") {
				t.Errorf("%s --%s: required %v, its help says %q", c.name, name, required, text)
			}
			if !required && !strings.Contains(text, "(default") {
				t.Errorf("%s --%s shows no default: %q", c.name, name, text)
			}
		}
		for name, want := range spot[c.name] {
			if !strings.Contains(blocks[name], want) {
				t.Errorf("%s --%s: %q lacks %q", c.name, name, blocks[name], want)
			}
		}
		for _, line := range strings.Split(res.stdout, "\n") {
			if strings.HasPrefix(line, "  --") && len(line) > helpColumns && strings.Contains(line, " ") {
				t.Errorf("%s: a flag's line of %d columns: %q", c.name, len(line), line)
			}
		}
	}
}

// TestRequiredFlagsEnforced: each flag the help marks required is one the
// command refuses to run without (exit 2, naming it), before any input is
// read (the files here do not exist).
func TestRequiredFlagsEnforced(t *testing.T) {
	full := map[string][]string{
		"encode":  {"encode", "in.csv", "--columns", "a", "--out", "o.csv", "--tables", "t"},
		"apply":   {"apply", "in.csv", "--tables", "t", "--out", "o.csv"},
		"merge":   {"merge", "t1", "t2", "--tables", "t"},
		"compare": {"compare", "in.csv", "--target", "y", "--columns", "a"},
	}
	for cmd, flags := range requiredFlags {
		args, ok := full[cmd]
		if !ok {
			t.Fatalf("no command line for %s in the test", cmd)
		}
		for _, f := range flags {
			i := slices.Index(args, "--"+f)
			without := slices.Delete(slices.Clone(args), i, i+2)
			res := runCLI(t, without...)
			if res.code != exitUsage || !strings.Contains(res.stderr, "--"+f) {
				t.Errorf("%s without --%s: exit %d, %q; want exit %d naming --%s", cmd, f, res.code, res.stderr, exitUsage, f)
			}
		}
	}
}

// TestHelpCommand: "manyfold help CMD" prints CMD's help, as CMD --help
// does, with the exit codes; "help" of an unknown command is a usage
// error; --version is version.
func TestHelpCommand(t *testing.T) {
	for _, c := range commands {
		help := runCLI(t, "help", c.name)
		flag := runCLI(t, c.name, "--help")
		if help.code != exitOK || help.stdout != flag.stdout || !strings.Contains(help.stdout, "Usage: manyfold "+c.name) {
			t.Errorf("help %s: exit %d, and its text is not that of %s --help:\n%s", c.name, help.code, c.name, help.stdout)
		}
		if !strings.HasSuffix(help.stdout, "\n"+exitCodesText()) {
			t.Errorf("help %s does not end with the exit codes:\n%s", c.name, help.stdout)
		}
	}
	if top := runCLI(t, "help"); !strings.Contains(top.stdout, exitCodesText()) || !strings.Contains(top.stdout, "manyfold help COMMAND") {
		t.Errorf("manyfold help lacks the exit codes or help COMMAND:\n%s", top.stdout)
	}
	if res := runCLI(t, "help", "encdoe"); res.code != exitUsage || !strings.Contains(res.stderr, `unknown command "encdoe"; did you mean encode?`) {
		t.Errorf("help encdoe: exit %d, %q", res.code, res.stderr)
	}
	v, vv := runCLI(t, "version"), runCLI(t, "--version")
	if v.code != exitOK || vv.code != exitOK || v.stdout != vv.stdout || !strings.HasPrefix(v.stdout, "manyfold ") {
		t.Errorf("version %q (exit %d), --version %q (exit %d)", v.stdout, v.code, vv.stdout, vv.code)
	}
}

// TestDidYouMean: a misspelled command or flag is answered with the
// closest name; a command far from all gets no guess.
func TestDidYouMean(t *testing.T) {
	cases := []struct {
		args []string
		want string
		not  string
	}{
		{[]string{"encod", "x.csv"}, `unknown command "encod"; did you mean encode?`, ""},
		{[]string{"comapre"}, "did you mean compare?", ""},
		{[]string{"fold"}, `unknown command "fold"`, "did you mean"},
		{[]string{"scan", "x.csv", "--colums", "a"}, "unknown flag: --colums; did you mean --columns? (see manyfold scan --help)", ""},
		{[]string{"compare", "x.csv", "--inner-fold", "3"}, "did you mean --inner-folds?", ""},
		{[]string{"apply", "x.csv", "--tabels", "t"}, "did you mean --tables?", ""},
		{[]string{"scan", "x.csv", "--zzzzzzzzzzzz"}, "unknown flag: --zzzzzzzzzzzz (see", "did you mean"},
		{[]string{"demo", "--out", "d"}, "unknown flag: --out (see", "did you mean"}, // 3 edits from --rows and --dir: no guess
	}
	for _, c := range cases {
		res := runCLI(t, c.args...)
		if res.code != exitUsage || !strings.Contains(res.stderr, c.want) || (c.not != "" && strings.Contains(res.stderr, c.not)) {
			t.Errorf("%s: exit %d, %q; want exit %d with %q", strings.Join(c.args, " "), res.code, res.stderr, exitUsage, c.want)
		}
	}
}

// TestExitCodesInREADME: the codes the help lists (exitCodes) are those
// of the README's "Exit codes" table, and the codes exitCode returns are
// among them.
func TestExitCodesInREADME(t *testing.T) {
	b, err := os.ReadFile("../../README.md")
	if err != nil {
		t.Fatal(err)
	}
	_, sec, ok := strings.Cut(string(b), "\n## Exit codes\n")
	if !ok {
		t.Fatal(`README has no "## Exit codes"`)
	}
	sec, _, _ = strings.Cut(sec, "\n## ")
	var readme []int
	for _, m := range regexp.MustCompile(`(?m)^\| ([0-9, ]+) \|`).FindAllStringSubmatch(sec, -1) {
		for _, f := range strings.Split(m[1], ",") {
			n, err := strconv.Atoi(strings.TrimSpace(f))
			if err != nil {
				t.Fatal(err)
			}
			readme = append(readme, n)
		}
	}
	var help []int
	for _, c := range exitCodes {
		help = append(help, c.code)
	}
	if !slices.Equal(readme, help) {
		t.Errorf("README lists exit codes %v, the help %v", readme, help)
	}
	for _, code := range []int{exitOK, exitFailure, exitUsage, exitInput, exitData, exitOutput, exitMismatch, exitCode(&usageError{"x"})} {
		if !slices.Contains(help, code) {
			t.Errorf("exit code %d is not in the help's list", code)
		}
	}
}
