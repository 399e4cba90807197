package pipeline_test

import (
	"bytes"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"manyfold/encoders/method"
	"manyfold/encoders/pipeline"
	"manyfold/folds"
	"manyfold/io/table"
	"manyfold/io/tableio"
)

// shardSpec is the spec of a sharded job over shipmentsText's columns:
// target, plan, scheme and fold rule as TestShardedFitSameAsOnePass gives
// them.
func shardSpec(t *testing.T, target, plan, scheme, foldBy string) pipeline.Spec {
	t.Helper()
	sp := pipeline.DefaultSpec()
	sp.Target, sp.Folds, sp.Seed = target, 3, 7
	var err error
	if sp.Encodings, err = method.ParsePlan(plan); err != nil {
		t.Fatal(err)
	}
	if sp.Encodings.PerColumn == nil {
		sp.Columns = []string{"postcode", "sender", "route"}
	}
	var ok bool
	if sp.Scheme, ok = method.ParseScheme(scheme); !ok {
		t.Fatalf("scheme %q", scheme)
	}
	if sp.FoldBy, err = folds.ParseRule(foldBy); err != nil {
		t.Fatal(err)
	}
	return sp
}

// surveyAll runs stage 0 over every shard and returns the plan.
func surveyAll(t *testing.T, sp pipeline.Spec, shards []string) *pipeline.ShardPlan {
	t.Helper()
	plan, _, err := planShards(t, sp, shards)
	if err != nil {
		t.Fatal(err)
	}
	return plan
}

// editRow rewrites data row row (from 1) of the CSV at path with edit,
// which is given the row's fields.
func editRow(t *testing.T, path string, row int, edit func(fields []string) []string) {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(string(b), "\n")
	lines[row] = strings.Join(edit(strings.Split(lines[row], ",")), ",")
	if err := os.WriteFile(path, []byte(strings.Join(lines, "\n")), 0o644); err != nil {
		t.Fatal(err)
	}
}

// setField returns an edit that sets field i of a row to v.
func setField(i int, v string) func([]string) []string {
	return func(f []string) []string { f[i] = v; return f }
}

// dataError checks that err is a *table.DataError of file at row (and, when
// line > 0, at that line), naming column when it is not empty.
func dataError(t *testing.T, what string, err error, file string, row, line int64, column string) {
	t.Helper()
	var de *table.DataError
	if !errors.As(err, &de) {
		t.Fatalf("%s: %T is not a DataError: %v", what, err, err)
	}
	if de.File != file || de.Row != row || (line > 0 && de.Line != line) || (column != "" && de.Column != column) {
		t.Errorf("%s: file %q row %d line %d column %q, want %q row %d line %d column %q: %v",
			what, de.File, de.Row, de.Line, de.Column, file, row, line, column, err)
	}
}

// encodeErr encodes shard i of plan with m and returns Encode's error.
func encodeErr(t *testing.T, m *pipeline.Model, plan *pipeline.ShardPlan, path string, i int) error {
	t.Helper()
	r := open(t, path)
	defer r.Close()
	schema, _, _, err := m.OutputSchema(path, r.Schema(), pipeline.Training)
	if err != nil {
		t.Fatal(err)
	}
	w, err := tableio.Create(filepath.Join(t.TempDir(), "out.csv"), schema, tableio.WriteOptions{})
	if err != nil {
		t.Fatal(err)
	}
	defer w.Abort()
	_, err = m.Encode(r, w, withThreads(plan.EncodeOptions(i), path))
	return err
}

// fitShardErr runs stage 1 over shard i of plan and returns its error.
func fitShardErr(t *testing.T, plan *pipeline.ShardPlan, path string, i int) error {
	t.Helper()
	r := open(t, path)
	defer r.Close()
	_, err := pipeline.FitShard(r, plan, i, pipeline.FitOptions{File: path, Threads: 2})
	return err
}

// surveyErr runs stage 0 over the shard at path and returns its error.
func surveyErr(t *testing.T, sp pipeline.Spec, path string) error {
	t.Helper()
	r := open(t, path)
	defer r.Close()
	_, err := pipeline.Survey(r, sp, path)
	return err
}

// TestShardErrorsNameShardRow: an error in a shard's rows names the shard's
// file and its own row and line, not the row counted across the shards:
// text in a regression target (Survey, FitShard, and Encode after the
// shard changed), a third class of a binary target met by Encode, and a
// ragged CSV row (the reader's own row and line kept as it gave them).
func TestShardErrorsNameShardRow(t *testing.T) {
	csv := shipmentsText(200)
	const cost, late = 5, 4 // fields of shipmentsText
	sizes := []int{40, 40, 40, 40, 40}

	t.Run("regression target text", func(t *testing.T) {
		dir := t.TempDir()
		shards := splitText(t, dir, csv, sizes)
		sp := shardSpec(t, "cost", "target:eb+freq", "kfold", "rows")
		sp.Task = "regression"
		plan := surveyAll(t, sp, shards)
		m, _ := shardedModel(t, sp, shards, 2)
		editRow(t, shards[3], 2, setField(cost, "oops"))
		dataError(t, "Survey", surveyErr(t, sp, shards[3]), shards[3], 2, 3, "cost")
		dataError(t, "FitShard", fitShardErr(t, plan, shards[3], 3), shards[3], 2, 3, "cost")
		dataError(t, "Encode", encodeErr(t, m, plan, shards[3], 3), shards[3], 2, 3, "cost")
	})

	t.Run("binary target third class at encode", func(t *testing.T) {
		dir := t.TempDir()
		shards := splitText(t, dir, csv, sizes)
		sp := shardSpec(t, "late", "target:eb+freq", "kfold", "rows")
		m, plan := shardedModel(t, sp, shards, 2)
		editRow(t, shards[3], 2, setField(late, "2"))
		dataError(t, "Encode", encodeErr(t, m, plan, shards[3], 3), shards[3], 2, 3, "late")
	})

	t.Run("ragged row", func(t *testing.T) {
		// The ragged row is past the rows before its shard, so that a
		// reader's row taken for a row across the shards would be moved.
		dir := t.TempDir()
		shards := splitText(t, dir, csv, []int{5, 5, 5, 80, 105})
		sp := shardSpec(t, "late", "target:eb+freq", "kfold", "rows")
		m, plan := shardedModel(t, sp, shards, 2)
		editRow(t, shards[3], 30, func(f []string) []string { return append(f, "extra") })
		r := open(t, shards[3])
		want := table.ForEach(r, func(*table.Batch) error { return nil })
		r.Close()
		var de *table.DataError
		if !errors.As(want, &de) || de.Line != 31 || de.Row != 0 && de.Row != 30 {
			t.Fatalf("the reader of the ragged shard: %v, want a DataError within the shard", want)
		}
		if de.File != shards[3] {
			t.Errorf("the reader names %q, not the shard %q", de.File, shards[3])
		}
		dataError(t, "Survey", surveyErr(t, sp, shards[3]), de.File, de.Row, de.Line, de.Column)
		dataError(t, "FitShard", fitShardErr(t, plan, shards[3], 3), de.File, de.Row, de.Line, de.Column)
		dataError(t, "Encode", encodeErr(t, m, plan, shards[3], 3), de.File, de.Row, de.Line, de.Column)
	})
}

// TestShardedOrderBy: with --order-by, the ordered scheme over shards
// sorted by a column (a numeric day and a text date; ties across a
// boundary; a shard whose column is all null; an empty shard) gives the
// one pass's bytes; shards out of order are refused by the plan, which
// names the first row of the shard that starts too early (counted across
// the shards) and the column; a shard not sorted within is refused by its
// survey, which names its own row; a shard after the first encoded
// without the statistics of those before it is refused.
func TestShardedOrderBy(t *testing.T) {
	var text strings.Builder
	text.WriteString("postcode,sender,day,date,late,cost\n")
	for i := 0; i < 120; i++ {
		day := fmt.Sprint(i / 7)
		if i >= 40 && i < 50 {
			day = "" // shard 2 (rows 41 to 50) has no day at all
		}
		fmt.Fprintf(&text, "PC%d,S%d,%s,2026-12-%02d,%d,%d.%02d\n", i%6, i%4, day, 1+i/5, (i*7)%3%2, 3+i%9, i*37%100)
	}
	sizes := []int{25, 15, 10, 0, 70} // day 3 (rows 22 to 28) ends shard 0 and starts shard 1
	for _, col := range []string{"day", "date"} {
		t.Run(col, func(t *testing.T) {
			dir := t.TempDir()
			whole := filepath.Join(dir, "whole.csv")
			os.WriteFile(whole, []byte(text.String()), 0o644)
			sp := shardSpec(t, "cost", "target:m=2+freq", "ordered", "rows")
			sp.Columns, sp.OrderBy = []string{"postcode", "sender"}, col
			r := open(t, whole)
			m, err := pipeline.Fit(r, sp, pipeline.FitOptions{File: whole, TotalRows: 120})
			r.Close()
			if err != nil {
				t.Fatal(err)
			}
			wantOut := filepath.Join(dir, "want.csv")
			encodeTo(t, m, whole, wantOut, pipeline.EncodeOptions{})
			want, _ := os.ReadFile(wantOut)
			shards := splitText(t, dir, text.String(), sizes)
			sm, plan, opts := shardedRun(t, sp, shards, 4)
			got := encodeShards(t, sm, shards, opts, dir)
			if !bytes.Equal(got, want) {
				t.Errorf("the outputs differ from the one pass's%s", firstDiff(got, want))
			}

			// Shards 1 and 4 swapped: the first shard with values after
			// shard 4 (now the second) starts before its end: shard 5,
			// shard 1 of old, for the day (shard 3 has no day), shard 3
			// for the date.
			swapped := []string{shards[0], shards[4], shards[2], shards[3], shards[1]}
			_, _, err = planShards(t, sp, swapped)
			row, name := int64(25+70+10+0+1), "shard 5 starts with"
			if col == "date" {
				row, name = 25+70+1, "shard 3 starts with"
			}
			dataError(t, "PlanShards", err, "the shards", row, 0, col)
			if err != nil && !strings.Contains(err.Error(), name) {
				t.Errorf("the error does not name the shard: %v", err)
			}

			// A shard not sorted within: the survey names its row.
			bad := filepath.Join(dir, "bad.csv")
			os.WriteFile(bad, []byte("postcode,sender,day,date,late,cost\nPC1,S1,5,2026-12-05,1,3\nPC1,S1,4,2026-12-04,1,3\n"), 0o644)
			dataError(t, "Survey", surveyErr(t, sp, bad), bad, 2, 3, col)

			// Stage 2 of a later shard without what came before.
			if err := encodeErr(t, sm, plan, shards[1], 1); err == nil || !strings.Contains(err.Error(), "before") {
				t.Errorf("shard 1 encoded without the statistics before it: %v", err)
			}
		})
	}
}

// TestPlanShardsRefuses: the plan refuses a target of
// more than MaxClasses classes over the shards' union of labels when each
// shard has fewer; a binary task whose shards hold three labels between
// them is refused before a model is made.
func TestPlanShardsRefuses(t *testing.T) {
	t.Run("classes over the union", func(t *testing.T) {
		dir := t.TempDir()
		var text strings.Builder
		text.WriteString("sender,label\n")
		for i := 0; i < 90; i++ {
			fmt.Fprintf(&text, "S%d,L%02d\n", i%7, i)
		}
		shards := splitText(t, dir, text.String(), []int{30, 30, 30})
		sp := shardSpec(t, "label", "target:eb", "kfold", "rows")
		sp.Columns = []string{"sender"}
		plan, _, err := planShards(t, sp, shards)
		var de *table.DataError
		if !errors.As(err, &de) || de.Column != "label" || de.File != "the shards" || plan != nil {
			t.Fatalf("90 labels over 3 shards: plan %v, error %T %v; want a DataError naming the shards and column label", plan, err, err)
		}
		if !strings.Contains(err.Error(), fmt.Sprint(pipeline.MaxClasses)) {
			t.Errorf("the error does not say the limit: %v", err)
		}
	})

	t.Run("binary with a third label across shards", func(t *testing.T) {
		dir := t.TempDir()
		// Each shard has two of the labels a, b, c; all three together.
		text := "sender,label\nS1,a\nS2,b\nS1,a\nS3,b\nS1,a\nS2,c\nS2,a\nS1,c\nS3,b\nS3,c\nS1,b\nS2,c\n"
		shards := splitText(t, dir, text, []int{4, 4, 4})
		sp := shardSpec(t, "label", "target:eb", "kfold", "rows")
		sp.Columns = []string{"sender"}
		sp.Task = "binary"
		// Refused by the plan, before any shard is fitted.
		if _, _, err := planShards(t, sp, shards); err == nil {
			t.Error("the plan of a binary task over three labels was made")
		}
		if err := sharded(t, sp, shards); err == nil {
			t.Fatal("a binary task over three labels made a model")
		} else {
			var de *table.DataError
			if !errors.As(err, &de) || de.Column != "label" {
				t.Errorf("%T %v: want a DataError naming column label", err, err)
			}
		}
		// A numeric target's third value alike.
		text = "sender,label\nS1,0\nS2,1\nS1,0\nS3,1\nS1,0\nS2,2\nS2,0\nS1,2\nS3,1\nS3,2\nS1,1\nS2,2\n"
		shards = splitText(t, dir, text, []int{4, 4, 4})
		if err := sharded(t, sp, shards); err == nil {
			t.Fatal("a binary task over three numbers made a model")
		}
	})
}

// sharded runs the whole sharded fit and returns the first error of its
// stages: Survey, PlanShards, FitShard, Assemble.
func sharded(t *testing.T, sp pipeline.Spec, shards []string) error {
	t.Helper()
	plan, schema, err := planShards(t, sp, shards)
	if err != nil {
		return err
	}
	var partials [][]byte
	for i, p := range shards {
		r := open(t, p)
		ss, err := pipeline.FitShard(r, plan, i, pipeline.FitOptions{File: p})
		r.Close()
		if err != nil {
			return err
		}
		b, err := ss.Partial(0, 1)
		if err != nil {
			t.Fatal(err)
		}
		partials = append(partials, b)
	}
	_, err = pipeline.Assemble(plan, schema, partials, pipeline.FitOptions{File: "the shards"})
	return err
}

// TestAssembleOrderFree: the model assembled from stage 1's partials of
// every shard and partition as they are, from all of them merged at once,
// and from each partition's partials merged in a tree (pairs, then pairs of
// pairs, the shards in reverse order) writes the same mapping tables and
// outputs, byte for byte, as the one-pass fit.
func TestAssembleOrderFree(t *testing.T) {
	dir := t.TempDir()
	csv := shipmentsText(701)
	whole := filepath.Join(dir, "whole.csv")
	if err := os.WriteFile(whole, []byte(csv), 0o644); err != nil {
		t.Fatal(err)
	}
	const rest = "+freq+topk:4+hash:32"
	jobs := []struct{ name, target, plan, foldBy string }{
		{"binary column prior", "late", "postcode=target:eb:prior=column:route" + rest + ",sender=target:m=2+woe,route=freq", "rows"},
		{"regression", "cost", "target:eb:prior=prefix3" + rest, "group=sender"},
		{"multi-class", "parcel_type", "target:eb" + rest, "rows"},
	}
	const parts = 4
	for _, job := range jobs {
		t.Run(job.name, func(t *testing.T) {
			sp := shardSpec(t, job.target, job.plan, "kfold", job.foldBy)
			r := open(t, whole)
			m, err := pipeline.Fit(r, sp, pipeline.FitOptions{File: whole, Threads: 2, Tables: true, TotalRows: 701})
			r.Close()
			if err != nil {
				t.Fatal(err)
			}
			jdir := filepath.Join(dir, job.name)
			wantTables := filepath.Join(jdir, "want.tables")
			if err := m.SaveTables(wantTables); err != nil {
				t.Fatal(err)
			}
			wantOut := filepath.Join(jdir, "want.csv")
			encodeTo(t, m, whole, wantOut, pipeline.EncodeOptions{Threads: 2})
			want, _ := os.ReadFile(wantOut)

			shards := splitText(t, jdir, csv, unevenSizes(701, 8))
			plan := surveyAll(t, sp, shards)
			schema := schemaOf(t, shards[0])
			byPart := make([][][]byte, parts) // [partition][shard]
			var raw [][]byte
			for i, p := range shards {
				r := open(t, p)
				ss, err := pipeline.FitShard(r, plan, i, pipeline.FitOptions{File: p, Threads: 2})
				r.Close()
				if err != nil {
					t.Fatal(err)
				}
				for part := range byPart {
					b, err := ss.Partial(part, parts)
					if err != nil {
						t.Fatal(err)
					}
					byPart[part] = append(byPart[part], b)
					raw = append(raw, b)
				}
			}
			merge := func(ps [][]byte) []byte {
				b, err := pipeline.MergePartials(plan, schema, ps, pipeline.FitOptions{})
				if err != nil {
					t.Fatalf("merge: %v", err)
				}
				return b
			}
			var tree [][]byte
			for part := range byPart {
				level := append([][]byte(nil), byPart[part]...)
				for i, j := 0, len(level)-1; i < j; i, j = i+1, j-1 {
					level[i], level[j] = level[j], level[i]
				}
				for len(level) > 1 {
					var next [][]byte
					for i := 0; i < len(level); i += 2 {
						next = append(next, merge(level[i:min(i+2, len(level))]))
					}
					level = next
				}
				tree = append(tree, level[0])
			}
			for _, c := range []struct {
				name     string
				partials [][]byte
			}{
				{"raw", raw},
				{"merged at once", [][]byte{merge(raw)}},
				{"tree", tree},
			} {
				sm, err := pipeline.Assemble(plan, schema, c.partials, pipeline.FitOptions{File: "the shards", Threads: 2, Tables: true})
				if err != nil {
					t.Fatalf("%s: assemble: %v", c.name, err)
				}
				tables := filepath.Join(jdir, c.name+".tables")
				if err := sm.SaveTables(tables); err != nil {
					t.Fatal(err)
				}
				sameFiles(t, tables, wantTables)
				var got []byte
				for i, p := range shards {
					out := filepath.Join(jdir, fmt.Sprintf("%s-%02d.csv", c.name, i))
					encodeTo(t, sm, p, out, withThreads(plan.EncodeOptions(i), ""))
					b, _ := os.ReadFile(out)
					if i > 0 {
						b = b[bytes.IndexByte(b, '\n')+1:]
					}
					got = append(got, b...)
				}
				if !bytes.Equal(got, want) {
					t.Errorf("%s: the outputs differ from the one pass's%s", c.name, firstDiff(got, want))
				}
			}
		})
	}
}

// TestAssembleRefusesMissingOrTwice: a shard's partials given twice (a
// task of a distributed engine run again), or missing, change every
// column's rows: Assemble refuses them with ErrShardPartial instead of
// making the model of other rows.
func TestAssembleRefusesMissingOrTwice(t *testing.T) {
	dir := t.TempDir()
	shards := splitText(t, dir, shipmentsText(300), []int{100, 0, 120, 80})
	for _, sp := range []pipeline.Spec{
		shardSpec(t, "late", "postcode=target:eb:prior=column:route+freq,sender=target:m=2,route=freq", "kfold", "rows"),
		shardSpec(t, "cost", "target:eb+freq", "loo", "rows"),
		shardSpec(t, "", "freq+topk:4", "kfold", "rows"),
	} {
		plan := surveyAll(t, sp, shards)
		schema := schemaOf(t, shards[0])
		const parts = 2
		var byShard [][][]byte // [shard][partition]
		for i, p := range shards {
			r := open(t, p)
			ss, err := pipeline.FitShard(r, plan, i, pipeline.FitOptions{File: p})
			r.Close()
			if err != nil {
				t.Fatal(err)
			}
			var ps [][]byte
			for part := 0; part < parts; part++ {
				b, err := ss.Partial(part, parts)
				if err != nil {
					t.Fatal(err)
				}
				ps = append(ps, b)
			}
			byShard = append(byShard, ps)
		}
		all := func(edit func(i, part int) int) [][]byte {
			var out [][]byte
			for i, ps := range byShard {
				for part, b := range ps {
					for range edit(i, part) {
						out = append(out, b)
					}
				}
			}
			return out
		}
		// times gives a partial n times where cond holds, else once.
		times := func(cond bool, n int) int {
			if cond {
				return n
			}
			return 1
		}
		assemble := func(ps [][]byte) error {
			_, err := pipeline.Assemble(plan, schema, ps, pipeline.FitOptions{File: "the shards"})
			return err
		}
		if err := assemble(all(func(int, int) int { return 1 })); err != nil {
			t.Fatalf("target %q: every partial once: %v", sp.Target, err)
		}
		// The empty shard's partials hold no rows: twice or missing, they
		// change nothing.
		if err := assemble(all(func(i, _ int) int { return times(i == 1, 2) })); err != nil {
			t.Errorf("target %q: the empty shard's partials twice: %v", sp.Target, err)
		}
		for _, c := range []struct {
			name string
			n    func(i, part int) int
		}{
			{"shard 3 twice", func(i, _ int) int { return times(i == 3, 2) }},
			{"shard 3 missing", func(i, _ int) int { return times(i == 3, 0) }},
			{"a partition of shard 0 twice", func(i, part int) int { return times(i == 0 && part == 1, 2) }},
			{"a partition of shard 2 missing", func(i, part int) int { return times(i == 2 && part == 0, 0) }},
		} {
			if err := assemble(all(c.n)); !errors.Is(err, pipeline.ErrShardPartial) {
				t.Errorf("target %q: %s: %v, want an error wrapping ErrShardPartial", sp.Target, c.name, err)
			}
		}
	}
}
