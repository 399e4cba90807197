package main

import (
	"fmt"
	"go/ast"
	"go/parser"
	"go/token"
	"io/fs"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"

	"manyfold/internal/param"
)

// TestParamsSpelledAsFlags: the libraries' messages name parameters
// (folds, target, fold rule group); the command prints each as the flag
// that sets it, in messages of every kind (usage, a column the input
// lacks, bad data, mapping tables that do not fit, an input renamed
// stdin), word for word as before the libraries stopped naming flags.
func TestParamsSpelledAsFlags(t *testing.T) {
	dir := t.TempDir()
	in := writeFile(t, dir, "t.csv", "a,b,late,num,g,o\nx,p,1,1.5,g1,3\ny,q,0,2.5,g2,2\nx,p,1,3.5,g1,1\ny,q,0,4.5,g2,4\nz,p,1,x,g3,5\n")
	three := writeFile(t, dir, "three.csv", "a,late\nl0,0\nl1,1\nl2,2\nl0,0\nl1,1\nl2,2\n")
	dup := writeFile(t, dir, "dup.csv", "a,a_freq\nx,1\ny,2\nx,3\n")
	var b strings.Builder
	b.WriteString("a,t\n")
	for i := range 66100 {
		v := i % 2 // a binary-looking first batch, then a numeric target
		if i >= 66000 {
			v = i
		}
		fmt.Fprintf(&b, "l%d,%d\n", i%7, v)
	}
	many := writeFile(t, dir, "many.csv", b.String())
	out := filepath.Join(dir, "o.csv")
	tables := filepath.Join(dir, "tb")
	small := filepath.Join(dir, "small")
	mustRun(t, "encode", in, "--columns", "a", "--methods", "freq", "--out", out, "--tables", small, "--min-level-rows", "1")
	enc := func(file string, flags ...string) []string {
		return append([]string{"encode", file, "--out", out, "--tables", tables}, flags...)
	}
	cmp := func(file string, flags ...string) []string {
		return append([]string{"compare", file}, flags...)
	}
	tests := []struct {
		args  []string
		stdin string
		code  int
		want  string
	}{
		{enc(in, "--methods", "freq"), "", exitUsage, "no columns to encode: give --columns"},
		{enc(in, "--columns", "a,a", "--methods", "freq"), "", exitUsage, `column "a" is named twice in --columns`},
		{enc(in, "--columns", "a", "--methods", "target"), "", exitUsage, "the target encodings need --target"},
		{enc(in, "--columns", "a", "--methods", "freq", "--folds", "1"), "", exitUsage, "--folds 1: want 2 to 100 (for leave-one-out give --scheme loo)"},
		{enc(in, "--columns", "a", "--methods", "freq", "--fold-by", "stratified"), "", exitUsage, "the fold rule stratified needs --target"},
		{enc(in, "--columns", "a", "--target", "late", "--methods", "target", "--task", "bogus"), "", exitUsage, `--task: unknown task "bogus" (want binary, multiclass or regression)`},
		{enc(in, "--columns", "a", "--methods", "freq", "--threads", "0"), "", exitUsage, "--threads 0: want at least 1"},
		{enc(in, "--columns", "a", "--target", "lat", "--methods", "target"), "", exitUsage, in + `: --target names column "lat", which the file does not have; closest: "late", "a", "b"`},
		{enc("-", "--columns", "a", "--target", "lat", "--methods", "target"), "a,late\nx,1\n", exitUsage, `stdin: --target names column "lat", which the file does not have; closest: "late", "a"`},
		{enc(in, "--columns", "a", "--target", "late", "--methods", "target", "--fold-by", "group=gg"), "", exitUsage, in + `: --fold-by group names column "gg", which the file does not have; closest: "g", "a", "b"`},
		{enc(in, "--columns", "aa", "--methods", "freq"), "", exitUsage, in + `: --columns names column "aa", which the file does not have; closest: "a", "b", "g"`},
		{enc(in, "--columns", "a", "--methods", "freq", "--scheme", "ordered", "--order-by", "oo"), "", exitUsage, in + `: --order-by names column "oo", which the file does not have; closest: "o", "a", "b"`},
		{enc(in, "--columns", "a", "--methods", "freq", "--keep", "zz"), "", exitUsage, in + `: --keep names column "zz", which the file does not have; closest: "a", "b", "g"`},
		{enc(in, "--columns", "a", "--methods", "freq", "--folds", "9"), "", exitUsage, "--folds 9 is more than the 5 rows of " + in},
		{enc(three, "--columns", "a", "--target", "late", "--task", "binary", "--methods", "target"), "", exitData, three + `:4: column "late": --task binary, but the target has a third value "2" besides "0" and "1"`},
		{enc(in, "--columns", "a", "--target", "late", "--methods", "target", "--scheme", "ordered", "--order-by", "o"), "", exitData, in + `:3: column "o": the file is not sorted by this column (--order-by): "2" comes after "3"`},
		{enc(many, "--columns", "a", "--target", "t", "--methods", "target"), "", exitData, many + `:66064: column "t": target has more than 64 classes; for a numeric target give --task regression`},
		{enc(dup, "--columns", "a", "--methods", "freq"), "", exitUsage, dup + `: output column "a_freq" would appear twice: the input has it; drop it with --keep or rename it`},
		{enc(in, "--columns", "a", "--methods", "freq", "--max-field-bytes", "1"), "", exitData, in + ":1: header field 3: byte 5: field longer than 1 bytes (the limit; raise it with --max-field-bytes)"},
		{[]string{"apply", dup, "--tables", small, "--out", out}, "", exitUsage, `output column "a_freq" would appear twice; drop the input column with --keep or rename it`},
		{[]string{"apply", in, "--tables", small, "--out", out, "--type", "a=int"}, "", exitMismatch, small + `: column "a" of ` + in + ` is int, but the tables were fitted on text (for CSV, force it with --type a=text)`},
		{[]string{"merge", small, small, "--tables", tables}, "", exitMismatch, small + ": fitted with --min-level-rows 1, so its small levels are missing; merge tables fitted with --min-level-rows 0"},
		{cmp(in, "--target", "late", "--columns", "a", "--folds", "1"), "", exitUsage, "--folds 1: want 2 to 50"},
		{cmp(in, "--target", "late", "--columns", "a", "--inner-folds", "1"), "", exitUsage, "--inner-folds 1: want 2 to 50"},
		{cmp(in, "--target", "late", "--columns", "a", "--lambda", "-1"), "", exitUsage, "--lambda -1: want a number > 0"},
		{cmp(in, "--target", "late", "--columns", "a", "--task", "bogus"), "", exitUsage, `--task "bogus": want binary, multiclass or regression`},
		{cmp(in, "--target", "late", "--columns", "a,a"), "", exitUsage, `column "a" is named twice in --columns`},
		{cmp(in, "--target", "late", "--columns", "a", "--with", "late"), "", exitUsage, `--with "late" is the target`},
		{cmp(in, "--target", "late", "--columns", "a", "--with", "num"), "", exitData, in + `:6: column "num": --with column: "x" is not a number`},
		{cmp(in, "--target", "late", "--columns", "a", "--with", "zz"), "", exitUsage, in + `: --with names column "zz", which the file does not have; closest: "a", "b", "g"`},
		{cmp(in, "--target", "late", "--columns", "a", "--fold-by", "group=zz"), "", exitUsage, in + `: --fold-by group names column "zz", which the file does not have; closest: "a", "b", "g"`},
		{cmp(three, "--target", "late", "--columns", "a", "--task", "binary"), "", exitData, three + `:4: column "late": --task binary, but the target has a third value "2" besides "0" and "1"`},
		{cmp(in, "--target", "late", "--columns", "a", "--candidates", ""), "", exitUsage, "--candidates: empty list"},
		{cmp(in, "--target", "late", "--columns", "a", "--candidates", "freq,freq"), "", exitUsage, "--candidates: freq is listed twice"},
		{cmp(in, "--target", "late", "--columns", "a", "--folds", "5", "--sample", "2"), "", exitUsage, "too few rows for 5 folds: outer fold 1 has 1 training and 1 held-out rows of the 2 the models use (lower --folds or raise --sample)"},
	}
	for _, tc := range tests {
		var stdin []byte
		if tc.stdin != "" {
			stdin = []byte(tc.stdin)
		}
		res := runStdin(t, stdin, tc.args...)
		want := "manyfold " + tc.args[0] + ": " + tc.want + "\n"
		if res.code != tc.code || res.stderr != want {
			t.Errorf("manyfold %s: exit %d, stderr\n%q\nwant exit %d,\n%q", strings.Join(tc.args, " "), res.code, res.stderr, tc.code, want)
		}
	}
}

// libraryFiles parses the non-test Go files of the module outside cmd/
// (main packages, which may name their flags) and bench/ (a module of its
// own) and calls f with each.
func libraryFiles(t *testing.T, f func(path string, fset *token.FileSet, file *ast.File)) {
	t.Helper()
	root := filepath.Join("..", "..")
	err := filepath.WalkDir(root, func(path string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if d.IsDir() {
			switch rel, _ := filepath.Rel(root, path); rel {
			case "cmd", "bench", "testdata", ".git":
				return filepath.SkipDir
			}
			return nil
		}
		if !strings.HasSuffix(path, ".go") || strings.HasSuffix(path, "_test.go") {
			return nil
		}
		fset := token.NewFileSet()
		file, err := parser.ParseFile(fset, path, nil, 0)
		if err != nil {
			return err
		}
		f(path, fset, file)
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
}

// TestEveryParamHasAFlag: every parameter a library declares for its
// messages (a constant of type param.Name) has its flag in flags, so that
// no message shows the command line a library's name for it.
func TestEveryParamHasAFlag(t *testing.T) {
	n := 0
	libraryFiles(t, func(path string, _ *token.FileSet, file *ast.File) {
		for _, d := range file.Decls {
			g, ok := d.(*ast.GenDecl)
			if !ok || g.Tok != token.CONST {
				continue
			}
			for _, s := range g.Specs {
				vs := s.(*ast.ValueSpec)
				sel, ok := vs.Type.(*ast.SelectorExpr)
				if !ok || sel.Sel.Name != "Name" || fmt.Sprint(sel.X) != "param" {
					continue
				}
				for i, v := range vs.Values {
					lit, ok := v.(*ast.BasicLit)
					if !ok {
						t.Errorf("%s: %s is not a string literal", path, vs.Names[i])
						continue
					}
					name, _ := strconv.Unquote(lit.Value)
					n++
					if flags[param.Name(name)] == "" {
						t.Errorf("%s: parameter %s (%q) has no flag in flags", path, vs.Names[i], name)
					}
				}
			}
		}
	})
	if n < len(flags) {
		t.Errorf("found %d parameters, fewer than the %d flags", n, len(flags))
	}
}

// TestLibrariesNameNoFlags: no string of a library holds a command-line
// flag, except those appended to a command line that the library writes
// out (scan's and compare's advice).
func TestLibrariesNameNoFlags(t *testing.T) {
	flag := regexp.MustCompile(`--[a-z]`)
	libraryFiles(t, func(path string, fset *token.FileSet, file *ast.File) {
		appended := map[*ast.BasicLit]bool{}
		ast.Inspect(file, func(n ast.Node) bool {
			if c, ok := n.(*ast.CallExpr); ok {
				if id, ok := c.Fun.(*ast.Ident); ok && id.Name == "append" {
					for _, a := range c.Args {
						if lit, ok := a.(*ast.BasicLit); ok {
							appended[lit] = true
						}
					}
				}
			}
			lit, ok := n.(*ast.BasicLit)
			if ok && lit.Kind == token.STRING && !appended[lit] && flag.MatchString(lit.Value) {
				t.Errorf("%s: %s names a flag; name the parameter (a param.Name) instead", fset.Position(lit.Pos()), lit.Value)
			}
			return true
		})
	})
}
