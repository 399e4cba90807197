package pipeline_test

import (
	"bytes"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	"manyfold/encoders/colstats"
	"manyfold/encoders/method"
	"manyfold/encoders/pipeline"
	"manyfold/folds"
	pgen "manyfold/internal/parcels"
	"manyfold/io/csvio"
	"manyfold/io/table"
	"manyfold/io/tableio"
)

// shipmentsText is a CSV of n shipments: postcode (some null), sender,
// route, parcel type, late (0/1) and cost with cents (so that float sums
// of it depend on their order).
func shipmentsText(n int) string {
	var b strings.Builder
	b.WriteString("postcode,sender,route,parcel_type,late,cost\n")
	types := []string{"letter", "small", "medium", "bulky"}
	for i := 0; i < n; i++ {
		pc := fmt.Sprintf("PC%03d", (i*7)%23+(i%5)*(i%3))
		if i%9 == 0 {
			pc = ""
		}
		cost := math.Round((2.5+float64((i*17)%40)/4)*110+float64(i)) / 100
		fmt.Fprintf(&b, "%s,ACC-%d,R%d-%d,%s,%d,%s\n", pc, (i*i+3)%11, i%4, (i/3)%5, types[(i/2+i%3)%4], (i*13+i/5)%3%2, strconv.FormatFloat(cost, 'f', -1, 64))
	}
	return b.String()
}

// splitText cuts a CSV's rows into shards of the given sizes, each with
// the header, written as files in dir; it returns their paths.
func splitText(t *testing.T, dir, csv string, sizes []int) []string {
	t.Helper()
	lines := strings.SplitAfter(strings.TrimSuffix(csv, "\n"), "\n")
	header, body := lines[0], lines[1:]
	var paths []string
	at := 0
	for i, n := range sizes {
		text := header + strings.Join(body[at:at+n], "")
		if !strings.HasSuffix(text, "\n") {
			text += "\n"
		}
		at += n
		p := filepath.Join(dir, fmt.Sprintf("part-%02d.csv", i))
		if err := os.WriteFile(p, []byte(text), 0o644); err != nil {
			t.Fatal(err)
		}
		paths = append(paths, p)
	}
	return paths
}

// unevenSizes cuts n rows into k shards of growing sizes, the second one
// empty when k > 2.
func unevenSizes(n, k int) []int {
	sizes, total := make([]int, k), 0
	for i := range sizes {
		sizes[i] = i + 1
		if k > 2 && i == 1 {
			sizes[i] = 0
		}
		total += sizes[i]
	}
	left := n
	for i := range sizes {
		sizes[i] = n * sizes[i] / total
		left -= sizes[i]
	}
	sizes[k-1] += left
	return sizes
}

func open(t *testing.T, path string) table.Reader {
	t.Helper()
	r, err := tableio.Open(path, tableio.ReadOptions{})
	if err != nil {
		t.Fatal(err)
	}
	return r
}

// encodeTo encodes the table at path with m into a CSV file out and
// returns the pass's summary.
func encodeTo(t *testing.T, m *pipeline.Model, path, out string, opt pipeline.EncodeOptions) pipeline.Summary {
	t.Helper()
	r := open(t, path)
	defer r.Close()
	schema, _, _, err := m.OutputSchema(path, r.Schema(), pipeline.Training)
	if err != nil {
		t.Fatal(err)
	}
	w, err := tableio.Create(out, schema, tableio.WriteOptions{})
	if err != nil {
		t.Fatal(err)
	}
	opt.File = path
	sum, err := m.Encode(r, w, opt)
	if err != nil {
		w.Abort()
		t.Fatalf("encode %s: %v", path, err)
	}
	if err := w.Commit(); err != nil {
		t.Fatal(err)
	}
	return sum
}

// schemaOf returns the schema of the table at path.
func schemaOf(t *testing.T, path string) *table.Schema {
	t.Helper()
	r := open(t, path)
	defer r.Close()
	return &table.Schema{Fields: append([]table.Field(nil), r.Schema().Fields...)}
}

// planShards runs stage 0 over every shard and makes the plan; it returns
// the first error of Survey or PlanShards, and the first shard's schema.
func planShards(t *testing.T, sp pipeline.Spec, shards []string) (*pipeline.ShardPlan, *table.Schema, error) {
	t.Helper()
	facts := make([]pipeline.ShardFacts, len(shards))
	for i, p := range shards {
		r := open(t, p)
		var err error
		facts[i], err = pipeline.Survey(r, sp, p)
		r.Close()
		if err != nil {
			return nil, nil, fmt.Errorf("survey %s: %w", p, err)
		}
	}
	schema := schemaOf(t, shards[0])
	plan, err := pipeline.PlanShards(sp, schema, facts, "the shards")
	return plan, schema, err
}

// shardedModel runs the sharded fit over the shards: stage 0, the plan,
// stage 1 cut into parts partitions, the merge of each partition, and the
// assembly.
func shardedModel(t *testing.T, sp pipeline.Spec, shards []string, parts int) (*pipeline.Model, *pipeline.ShardPlan) {
	t.Helper()
	m, plan, _ := shardedRun(t, sp, shards, parts)
	return m, plan
}

// shardedRun is shardedModel, and also returns what stage 2 of each shard
// takes (ShardPlan.EncodeOptions and, for the ordered scheme, the
// statistics of the shards before it from each partition's Preceding).
func shardedRun(t *testing.T, sp pipeline.Spec, shards []string, parts int) (*pipeline.Model, *pipeline.ShardPlan, func(i int) pipeline.EncodeOptions) {
	t.Helper()
	plan, schema, err := planShards(t, sp, shards)
	if err != nil {
		t.Fatal(err)
	}
	byPart := make([][][]byte, parts)
	for i, p := range shards {
		r := open(t, p)
		ss, err := pipeline.FitShard(r, plan, i, pipeline.FitOptions{File: p, Threads: 2})
		r.Close()
		if err != nil {
			t.Fatalf("stage 1 of %s: %v", p, err)
		}
		all, err := ss.Partials(parts)
		if err != nil {
			t.Fatal(err)
		}
		for part := range byPart {
			if i == 0 { // Partial gives what Partials gives
				if one, err := ss.Partial(part, parts); err != nil || !bytes.Equal(one, all[part]) {
					t.Fatalf("Partial(%d, %d) differs from Partials' (%v)", part, parts, err)
				}
			}
			byPart[part] = append(byPart[part], all[part])
		}
	}
	var merged [][]byte
	for part := range byPart {
		b, err := pipeline.MergePartials(plan, schema, byPart[part], pipeline.FitOptions{})
		if err != nil {
			t.Fatalf("merge of partition %d: %v", part, err)
		}
		merged = append(merged, b)
	}
	m, err := pipeline.Assemble(plan, schema, merged, pipeline.FitOptions{File: "the shards", Threads: 2, Tables: true})
	if err != nil {
		t.Fatalf("assemble: %v", err)
	}
	before := make([][][]byte, len(shards)) // per shard, per partition
	if sp.Scheme == method.Ordered {
		for part := range byPart {
			pre, err := pipeline.Preceding(plan, schema, byPart[part], pipeline.FitOptions{})
			if err != nil {
				t.Fatalf("preceding of partition %d: %v", part, err)
			}
			for i := range shards {
				before[i] = append(before[i], pre[i])
			}
		}
	}
	opts := func(i int) pipeline.EncodeOptions {
		o := withThreads(plan.EncodeOptions(i), "")
		if sp.Scheme == method.Ordered {
			if o.Before, err = plan.Before(schema, before[i], pipeline.FitOptions{}); err != nil {
				t.Fatalf("before shard %d: %v", i, err)
			}
		}
		return o
	}
	return m, plan, opts
}

// TestShardedFitSameAsOnePass: the sharded fit (stage 0, plan, stage 1 in
// partitions, merge, assembly, stage 2 shard by shard) over 1, 2, 8 and 13
// shards of uneven sizes, one empty, writes the outputs (concatenated in
// shard order) and mapping tables of Fit and Encode over the whole table,
// byte for byte: binary, multi-class and regression targets, the k-fold,
// leave-one-out, ordered and in-sample schemes, row, group, block and stratified
// folds, every method and both priors.
func TestShardedFitSameAsOnePass(t *testing.T) {
	dir := t.TempDir()
	csv := shipmentsText(1501)
	whole := filepath.Join(dir, "whole.csv")
	if err := os.WriteFile(whole, []byte(csv), 0o644); err != nil {
		t.Fatal(err)
	}
	const rest = "+freq+topk:4+hash:32+onehot:3"
	jobs := []struct {
		name, target, plan, scheme, foldBy string
	}{
		{"binary kfold", "late", "target:eb+woe" + rest, "kfold", "rows"},
		{"binary kfold column prior", "late", "postcode=target:eb:prior=column:route" + rest + ",sender=target:m=2" + rest + ",route=freq", "kfold", "rows"},
		{"binary loo", "late", "target:m=2" + rest, "loo", "rows"},
		{"binary none prefix prior", "late", "target:blend=2,1:prior=prefix3" + rest, "none", "rows"},
		{"regression kfold", "cost", "target:eb" + rest, "kfold", "rows"},
		{"regression loo group", "cost", "target:m=2" + rest, "loo", "group=sender"},
		{"regression prefix prior", "cost", "target:eb:prior=prefix3" + rest, "kfold", "rows"},
		{"regression column prior", "cost", "postcode=target:eb:prior=column:route" + rest + ",sender=target:eb" + rest, "kfold", "ordered"},
		{"regression column prior group", "cost", "postcode=target:eb:prior=column:route+freq,sender=target:m=20,route=target:eb", "kfold", "group=sender"},
		{"binary stratified", "late", "target:eb" + rest, "kfold", "stratified"},
		{"multi-class loo stratified", "parcel_type", "target:m=3" + rest, "loo", "stratified"},
		{"multi-class kfold", "parcel_type", "target:eb" + rest, "kfold", "rows"},
		{"multi-class loo", "parcel_type", "target:m=3" + rest, "loo", "group=route"},
		{"no target", "", "freq+topk:4+hash:32", "kfold", "rows"},
		{"binary ordered", "late", "target:eb+woe" + rest, "ordered", "rows"},
		{"binary ordered log-odds", "late", "postcode=target:m=2:logodds,sender=woe,route=target:blend=2,1", "ordered", "rows"},
		{"regression ordered", "cost", "target:eb" + rest, "ordered", "rows"},
		{"regression ordered blend", "cost", "target:blend=2,1" + rest, "ordered", "group=sender"},
		{"multi-class ordered", "parcel_type", "target:m=3" + rest, "ordered", "stratified"},
	}
	for _, job := range jobs {
		t.Run(job.name, func(t *testing.T) {
			sp := pipeline.DefaultSpec()
			sp.Target, sp.Folds, sp.Seed = job.target, 3, 7
			var err error
			if sp.Encodings, err = method.ParsePlan(job.plan); err != nil {
				t.Fatal(err)
			}
			if sp.Encodings.PerColumn == nil {
				sp.Columns = []string{"postcode", "sender", "route"}
			}
			sp.Scheme, _ = method.ParseScheme(job.scheme)
			if sp.FoldBy, err = folds.ParseRule(job.foldBy); err != nil {
				t.Fatal(err)
			}
			r := open(t, whole)
			m, err := pipeline.Fit(r, sp, pipeline.FitOptions{File: whole, Threads: 2, Tables: true, TotalRows: 1501})
			r.Close()
			if err != nil {
				t.Fatal(err)
			}
			wantOut := filepath.Join(dir, job.name+".csv")
			wantScores := encodeTo(t, m, whole, wantOut, pipeline.EncodeOptions{Threads: 2}).Scores
			wantTables := filepath.Join(dir, job.name+".tables")
			if err := m.SaveTables(wantTables); err != nil {
				t.Fatal(err)
			}
			want, _ := os.ReadFile(wantOut)
			for _, k := range []int{1, 2, 8, 13} {
				sdir := filepath.Join(dir, fmt.Sprintf("%s-%d", job.name, k))
				os.MkdirAll(sdir, 0o755)
				shards := splitText(t, sdir, csv, unevenSizes(1501, k))
				parts := 4
				if k >= 8 {
					parts = 64 // levels and their parents in another order than met
				}
				sm, _, opts := shardedRun(t, sp, shards, parts)
				got, scores := encodeShardsScored(t, sm, shards, opts, sdir)
				sameScores(t, k, scores, wantScores)
				if !bytes.Equal(got, want) {
					t.Errorf("%d shards: the outputs differ from the one pass's (%d and %d bytes)%s", k, len(got), len(want), firstDiff(got, want))
				}
				tables := filepath.Join(sdir, "tables")
				if err := sm.SaveTables(tables); err != nil {
					t.Fatal(err)
				}
				sameFiles(t, tables, wantTables)
			}
		})
	}
}

// encodeShards runs stage 2 over every shard, each into a CSV file in
// dir, and returns the outputs concatenated in shard order, the header
// once.
func encodeShards(t *testing.T, m *pipeline.Model, shards []string, opts func(int) pipeline.EncodeOptions, dir string) []byte {
	got, _ := encodeShardsScored(t, m, shards, opts, dir)
	return got
}

// encodeShardsScored is encodeShards, and also returns the training
// scores merged from the shards' (MergeScores).
func encodeShardsScored(t *testing.T, m *pipeline.Model, shards []string, opts func(int) pipeline.EncodeOptions, dir string) ([]byte, []*pipeline.Score) {
	t.Helper()
	var got []byte
	var states [][]byte
	for i, p := range shards {
		out := filepath.Join(dir, fmt.Sprintf("out-%02d.csv", i))
		sum := encodeTo(t, m, p, out, opts(i))
		st, err := sum.ScoreState()
		if err != nil {
			t.Fatal(err)
		}
		states = append(states, st)
		b, _ := os.ReadFile(out)
		if i > 0 {
			b = b[bytes.IndexByte(b, '\n')+1:]
		}
		got = append(got, b...)
	}
	slices.Reverse(states) // the order of the parts does not matter
	scores, err := pipeline.MergeScores(states)
	if err != nil {
		t.Fatal(err)
	}
	return got, scores
}

// sameScores checks that the training scores merged from k shards are
// the one pass's, bit for bit.
func sameScores(t *testing.T, k int, got, want []*pipeline.Score) {
	t.Helper()
	if len(got) != len(want) {
		t.Fatalf("%d shards: %d scores, the one pass %d", k, len(got), len(want))
	}
	for i := range got {
		g, w := got[i], want[i]
		if (g == nil) != (w == nil) || g != nil && (g.Metric != w.Metric || g.Rows != w.Rows || math.Float64bits(g.Value) != math.Float64bits(w.Value)) {
			t.Errorf("%d shards, column %d: score %+v, the one pass %+v", k, i, g, w)
		}
	}
}

// withThreads returns a shard's encode options with 2 threads and the
// file named.
func withThreads(o pipeline.EncodeOptions, file string) pipeline.EncodeOptions {
	o.Threads, o.File = 2, file
	return o
}

// firstDiff describes the first line where two texts differ.
func firstDiff(a, b []byte) string {
	la, lb := strings.Split(string(a), "\n"), strings.Split(string(b), "\n")
	for i := range min(len(la), len(lb)) {
		if la[i] != lb[i] {
			return fmt.Sprintf("; line %d:\n%s\n%s", i+1, la[i], lb[i])
		}
	}
	return ""
}

// sameFiles checks that two directories hold the same files, byte for
// byte.
func sameFiles(t *testing.T, a, b string) {
	t.Helper()
	ea, _ := os.ReadDir(a)
	eb, _ := os.ReadDir(b)
	if len(ea) != len(eb) {
		t.Fatalf("%s holds %d files, %s %d", a, len(ea), b, len(eb))
	}
	for i := range ea {
		x, _ := os.ReadFile(filepath.Join(a, ea[i].Name()))
		y, _ := os.ReadFile(filepath.Join(b, eb[i].Name()))
		if ea[i].Name() != eb[i].Name() || !bytes.Equal(x, y) {
			t.Errorf("%s and %s differ%s", filepath.Join(a, ea[i].Name()), filepath.Join(b, eb[i].Name()), firstDiff(x, y))
		}
	}
}

// TestShardedFitParcels: on the parcel network's table (40,000 rows, some
// thousand postcodes under 200 routes), whose parents (routes, postcode
// prefixes) are met in another order in every partition, hierarchical
// priors with the empirical-Bayes m give the one pass's bytes too (the
// parents' terms of the estimate are summed exactly: smooth.NestedMoments).
func TestShardedFitParcels(t *testing.T) {
	dir := t.TempDir()
	whole := filepath.Join(dir, "whole.csv")
	w, err := tableio.Create(whole, pgen.Schema(), tableio.WriteOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if err := pgen.Generate(pgen.Config{Rows: 40000, Seed: 9, Accounts: 3000}, w); err != nil {
		t.Fatal(err)
	}
	if err := w.Commit(); err != nil {
		t.Fatal(err)
	}
	text, err := os.ReadFile(whole)
	if err != nil {
		t.Fatal(err)
	}
	for _, job := range []struct{ name, target, plan string }{
		{"column prior", "cost", "dest_postcode=target:eb:prior=column:route+freq,route=target:eb"},
		{"prefix prior", "late", "dest_postcode=target:eb:prior=prefix2,sender_account=target:eb:prior=prefix4"},
	} {
		t.Run(job.name, func(t *testing.T) {
			sp := pipeline.DefaultSpec()
			sp.Target, sp.Folds, sp.Seed = job.target, 5, 3
			if sp.Encodings, err = method.ParsePlan(job.plan); err != nil {
				t.Fatal(err)
			}
			r := open(t, whole)
			m, err := pipeline.Fit(r, sp, pipeline.FitOptions{File: whole, Threads: 2, Tables: true})
			r.Close()
			if err != nil {
				t.Fatal(err)
			}
			wantTables := filepath.Join(dir, job.name+".tables")
			if err := m.SaveTables(wantTables); err != nil {
				t.Fatal(err)
			}
			sdir := filepath.Join(dir, job.name)
			os.MkdirAll(sdir, 0o755)
			shards := splitText(t, sdir, string(text), unevenSizes(40000, 8))
			sm, _ := shardedModel(t, sp, shards, 64)
			tables := filepath.Join(sdir, "tables")
			if err := sm.SaveTables(tables); err != nil {
				t.Fatal(err)
			}
			sameFiles(t, tables, wantTables)
		})
	}
}

// TestShardedTaskFromFirstRows: a numeric target whose first rows are a
// few whole numbers, fractions after them, is a regression target
// whatever cuts those rows: batches of two rows, or a first shard of five
// rows and an empty second one. (The task rule reads the first TaskRows
// rows, not the first batch or shard.)
func TestShardedTaskFromFirstRows(t *testing.T) {
	dir := t.TempDir()
	lines := strings.SplitAfter(shipmentsText(400), "\n")
	for i := 1; i <= 5; i++ {
		f := strings.Split(strings.TrimSuffix(lines[i], "\n"), ",")
		f[5] = strconv.Itoa(i%3) + ".0" // read as floats in a shard of its own too
		lines[i] = strings.Join(f, ",") + "\n"
	}
	csv := strings.Join(lines, "")
	whole := filepath.Join(dir, "whole.csv")
	if err := os.WriteFile(whole, []byte(csv), 0o644); err != nil {
		t.Fatal(err)
	}
	sp := pipeline.DefaultSpec()
	sp.Target, sp.Folds, sp.Seed, sp.Columns = "cost", 3, 7, []string{"postcode", "sender"}
	var err error
	if sp.Encodings, err = method.ParsePlan("target:eb+freq"); err != nil {
		t.Fatal(err)
	}
	fit := func(batchRows int) *pipeline.Model {
		r, err := tableio.Open(whole, tableio.ReadOptions{CSV: csvio.Options{BatchRows: batchRows}})
		if err != nil {
			t.Fatal(err)
		}
		defer r.Close()
		m, err := pipeline.Fit(r, sp, pipeline.FitOptions{File: whole, Threads: 2, Tables: true, TotalRows: 400})
		if err != nil {
			t.Fatalf("fit in batches of %d rows: %v", batchRows, err)
		}
		return m
	}
	m := fit(0)
	if m.Task != colstats.Regression {
		t.Fatalf("task %v, want regression", m.Task)
	}
	wantTables := filepath.Join(dir, "whole.tables")
	if err := m.SaveTables(wantTables); err != nil {
		t.Fatal(err)
	}
	small := filepath.Join(dir, "small.tables")
	if err := fit(2).SaveTables(small); err != nil {
		t.Fatal(err)
	}
	sameFiles(t, small, wantTables)
	wantOut := filepath.Join(dir, "whole.out.csv")
	encodeTo(t, m, whole, wantOut, pipeline.EncodeOptions{Threads: 2})
	want, _ := os.ReadFile(wantOut)
	sdir := filepath.Join(dir, "shards")
	os.MkdirAll(sdir, 0o755)
	shards := splitText(t, sdir, csv, []int{5, 0, 200, 195})
	sm, _, opts := shardedRun(t, sp, shards, 4)
	if got := encodeShards(t, sm, shards, opts, sdir); !bytes.Equal(got, want) {
		t.Errorf("the shards' outputs differ from the one pass's%s", firstDiff(got, want))
	}
	tables := filepath.Join(sdir, "tables")
	if err := sm.SaveTables(tables); err != nil {
		t.Fatal(err)
	}
	sameFiles(t, tables, wantTables)
}
