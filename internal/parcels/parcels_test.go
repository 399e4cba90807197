package parcels

import (
	"bytes"
	"errors"
	"math"
	"slices"
	"strings"
	"testing"

	"manyfold/io/table"
)

// textWriter collects the canonical text of every cell, one row a line,
// cells separated by tabs and nulls written as "\N".
type textWriter struct {
	buf     bytes.Buffer
	rows    int64
	batches int
	next    int64 // expected FirstRow of the next batch
	err     error // first inconsistency seen
}

func (w *textWriter) Write(b *table.Batch) error {
	if w.next == 0 {
		w.next = 1
	}
	if b.FirstRow != w.next && w.err == nil {
		w.err = errors.New("FirstRow not contiguous")
	}
	for c := range b.Cols {
		if b.Cols[c].Len() != b.Rows && w.err == nil {
			w.err = errors.New("column length differs from Rows")
		}
	}
	var cell []byte
	for i := range b.Rows {
		for c := range b.Cols {
			if c > 0 {
				w.buf.WriteByte('\t')
			}
			col := &b.Cols[c]
			if col.IsNull(i) {
				w.buf.WriteString(`\N`)
				continue
			}
			cell = col.AppendText(cell[:0], i)
			w.buf.Write(cell)
		}
		w.buf.WriteByte('\n')
	}
	w.rows += int64(b.Rows)
	w.next += int64(b.Rows)
	w.batches++
	return nil
}

func (w *textWriter) Close() error { return nil }

// funcWriter hands each batch to a function.
type funcWriter func(b *table.Batch) error

func (f funcWriter) Write(b *table.Batch) error { return f(b) }
func (f funcWriter) Close() error               { return nil }

func generateText(t *testing.T, cfg Config) *textWriter {
	t.Helper()
	w := &textWriter{}
	if err := Generate(cfg, w); err != nil {
		t.Fatalf("Generate(%+v): %v", cfg, err)
	}
	if w.err != nil {
		t.Fatalf("Generate(%+v): %v", cfg, w.err)
	}
	return w
}

func TestDeterministicAcrossBatchRows(t *testing.T) {
	base := Config{Rows: 5000, Seed: 42, Postcodes: 3000, Accounts: 20000, UnseenShare: 0.1}
	want := generateText(t, base).buf.String()
	for _, br := range []int{1, 7, 999, 4096, 5000, 65536} {
		cfg := base
		cfg.BatchRows = br
		got := generateText(t, cfg)
		if got.buf.String() != want {
			t.Errorf("BatchRows %d: output differs from the default batching", br)
		}
		wantBatches := int((base.Rows + int64(br) - 1) / int64(br))
		if got.batches != wantBatches {
			t.Errorf("BatchRows %d: %d batches, want %d", br, got.batches, wantBatches)
		}
	}
	// A prefix of a longer table is the shorter table.
	longer := base
	longer.Rows = 7000
	if !strings.HasPrefix(generateText(t, longer).buf.String(), want) {
		t.Errorf("the first %d rows of a longer table differ", base.Rows)
	}
	// Seed and Stream change the rows.
	for _, cfg := range []Config{
		{Rows: 5000, Seed: 43, Postcodes: 3000, Accounts: 20000, UnseenShare: 0.1},
		{Rows: 5000, Seed: 42, Stream: 1, Postcodes: 3000, Accounts: 20000, UnseenShare: 0.1},
	} {
		if generateText(t, cfg).buf.String() == want {
			t.Errorf("%+v gives the same rows as %+v", cfg, base)
		}
	}
}

// TestGolden pins the first rows of one configuration so that an
// unintended change to the generator shows up. The expected text was
// produced by this generator on amd64 and checked by eye for format.
func TestGolden(t *testing.T) {
	const want = "" +
		"S01N9IAFTY8\t65338\tA0079457\tR-119\tsmall\t0.89\t0\t5.15\n" +
		"S2JH49O6MC1\t95516\tA0077622\tR-109\tletter\t0.115\t0\t0.91\n" +
		"S8Q26S8MGOS\t83591\tA0122264\tR-182\tcold\t9.91\t0\t21\n"
	if got := generateText(t, Config{Rows: 3, Seed: 1}).buf.String(); got != want {
		t.Errorf("first rows of seed 1:\n%s\nwant:\n%s", got, want)
	}
}

func TestLateRateAcrossSeeds(t *testing.T) {
	for _, cfg := range []Config{
		{Rows: 100_000, Seed: 1},
		{Rows: 100_000, Seed: 2},
		{Rows: 100_000, Seed: 3, Postcodes: 2000, Accounts: 5000},
		{Rows: 100_000, Seed: 4, Accounts: 1_000_000},
		{Rows: 100_000, Seed: 1, Stream: 3, UnseenShare: 0.2},
	} {
		var late int64
		err := Generate(cfg, funcWriter(func(b *table.Batch) error {
			for _, v := range b.Cols[colLate].Ints {
				late += v
			}
			return nil
		}))
		if err != nil {
			t.Fatal(err)
		}
		if rate := float64(late) / float64(cfg.Rows); rate < 0.10 || rate > 0.20 {
			t.Errorf("%+v: late rate %.4f, want 0.10..0.20", cfg, rate)
		}
	}
}

func TestRowCounts(t *testing.T) {
	for _, tc := range []struct {
		rows      int64
		batchRows int
		batches   int
	}{
		{0, 0, 0},
		{1, 0, 1},
		{65536, 0, 1},
		{65537, 0, 2},
		{10, 3, 4},
	} {
		w := generateText(t, Config{Rows: tc.rows, BatchRows: tc.batchRows, Postcodes: 500, Accounts: 1000})
		if w.rows != tc.rows || w.batches != tc.batches {
			t.Errorf("rows %d batch %d: wrote %d rows in %d batches, want %d in %d",
				tc.rows, tc.batchRows, w.rows, w.batches, tc.rows, tc.batches)
		}
		if got := int64(bytes.Count(w.buf.Bytes(), []byte("\n"))); got != tc.rows {
			t.Errorf("rows %d: %d lines of text", tc.rows, got)
		}
	}
}

func TestSchemaAndForms(t *testing.T) {
	s := Schema()
	want := []string{"shipment_id", "dest_postcode", "sender_account", "route", "parcel_type", "weight_kg", "late", "cost"}
	if !slices.Equal(s.Names(), want) {
		t.Fatalf("Schema().Names() = %v, want %v", s.Names(), want)
	}
	formOf := map[table.Kind]table.Form{table.String: table.FormText, table.Int64: table.FormInt64, table.Float64: table.FormFloat64}
	err := Generate(Config{Rows: 100, Postcodes: 500, Accounts: 1000}, funcWriter(func(b *table.Batch) error {
		if len(b.Cols) != len(s.Fields) {
			t.Fatalf("%d columns, schema has %d", len(b.Cols), len(s.Fields))
		}
		for c, f := range s.Fields {
			if b.Cols[c].Form != formOf[f.Kind] {
				t.Errorf("column %s: form %d for kind %v", f.Name, b.Cols[c].Form, f.Kind)
			}
			if !f.Nullable && b.Cols[c].Nulls != nil && slices.Contains(b.Cols[c].Nulls, true) {
				t.Errorf("column %s is not nullable but has nulls", f.Name)
			}
		}
		return nil
	}))
	if err != nil {
		t.Fatal(err)
	}
}

func TestConfigErrors(t *testing.T) {
	for _, tc := range []struct {
		name string
		cfg  Config
		want string
	}{
		{"negative rows", Config{Rows: -1}, "rows"},
		{"too many postcodes", Config{Rows: 1, Postcodes: 100001}, "postcodes"},
		{"negative accounts", Config{Rows: 1, Accounts: -5}, "accounts"},
		{"unseen above 1", Config{Rows: 1, UnseenShare: 1.5}, "unseen share"},
		{"unseen NaN", Config{Rows: 1, UnseenShare: math.NaN()}, "unseen share"},
		{"no room for unseen", Config{Rows: 1, Postcodes: 99001, UnseenShare: 0.2}, "no room"},
		{"batch too big", Config{Rows: 1, BatchRows: 1 << 23}, "batch rows"},
		{"stream too big", Config{Rows: 1, Stream: 1024}, "stream"},
	} {
		err := Generate(tc.cfg, funcWriter(func(*table.Batch) error { return nil }))
		if err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: error %v, want one mentioning %q", tc.name, err, tc.want)
		}
	}
}

func TestWriterErrorStops(t *testing.T) {
	boom := errors.New("disk full")
	calls := 0
	err := Generate(Config{Rows: 100, BatchRows: 10, Postcodes: 500, Accounts: 1000}, funcWriter(func(*table.Batch) error {
		calls++
		if calls == 3 {
			return boom
		}
		return nil
	}))
	if !errors.Is(err, boom) || calls != 3 {
		t.Fatalf("err %v after %d calls, want %v after 3", err, calls, boom)
	}
	if !strings.Contains(err.Error(), "rows 21 to 30") {
		t.Errorf("error %q does not name the rows", err)
	}
}

// stats gathers what the statistical tests look at.
type stats struct {
	rows, nulls, late int64
	postcodes         map[string]int64 // rows per postcode
	accounts          map[string]int64
	prefixes          map[string]bool
	routes, types     map[string]int64
	ids               map[string]bool
	badFormat         []string
	costWeight        [2][]float64 // cost and weight of "small" parcels
	lateByPostcode    map[string][2]int64
}

func collect(t *testing.T, cfg Config, keepIDs bool) *stats {
	t.Helper()
	s := &stats{
		postcodes: map[string]int64{}, accounts: map[string]int64{}, prefixes: map[string]bool{},
		routes: map[string]int64{}, types: map[string]int64{}, lateByPostcode: map[string][2]int64{},
	}
	if keepIDs {
		s.ids = map[string]bool{}
	}
	isDigits := func(b []byte) bool {
		for _, c := range b {
			if c < '0' || c > '9' {
				return false
			}
		}
		return true
	}
	bad := func(what string, b []byte) {
		if len(s.badFormat) < 5 {
			s.badFormat = append(s.badFormat, what+" "+string(b))
		}
	}
	err := Generate(cfg, funcWriter(func(b *table.Batch) error {
		c := b.Cols
		for i := range b.Rows {
			s.rows++
			late := c[colLate].Ints[i]
			if late != 0 && late != 1 {
				bad("late", []byte{byte('0' + late)})
			}
			s.late += late
			if id := c[colShipment].Bytes(i); len(id) != 11 || id[0] != 'S' {
				bad("id", id)
			} else if s.ids != nil {
				s.ids[string(id)] = true
			}
			if c[colPostcode].IsNull(i) {
				s.nulls++
			} else {
				pc := c[colPostcode].Bytes(i)
				if len(pc) != 5 || !isDigits(pc) {
					bad("postcode", pc)
				}
				s.postcodes[string(pc)]++
				s.prefixes[string(pc[:3])] = true
				lb := s.lateByPostcode[string(pc)]
				lb[0]++
				lb[1] += late
				s.lateByPostcode[string(pc)] = lb
			}
			ac := c[colAccount].Bytes(i)
			if len(ac) != 8 || ac[0] != 'A' || !isDigits(ac[1:]) {
				bad("account", ac)
			}
			s.accounts[string(ac)]++
			rt := c[colRoute].Bytes(i)
			if len(rt) != 5 || string(rt[:2]) != "R-" || !isDigits(rt[2:]) {
				bad("route", rt)
			}
			s.routes[string(rt)]++
			ty := string(c[colType].Bytes(i))
			s.types[ty]++
			w, cost := c[colWeight].Floats[i], c[colCost].Floats[i]
			if !(w > 0) || !(cost > 0) || math.Abs(cost*100-math.Round(cost*100)) > 1e-6 {
				bad("weight/cost", table.AppendFloat(table.AppendFloat(nil, w), cost))
			}
			if ty == "small" && len(s.costWeight[0]) < 100000 {
				s.costWeight[0] = append(s.costWeight[0], cost)
				s.costWeight[1] = append(s.costWeight[1], w)
			}
		}
		return nil
	}))
	if err != nil {
		t.Fatal(err)
	}
	if len(s.badFormat) > 0 {
		t.Errorf("badly formatted cells: %q", s.badFormat)
	}
	return s
}

// expectedDistinct is the expected number of distinct levels among n draws
// from the sampler: the sum over levels of 1 - (1-p)^n (computed from the
// formula).
func expectedDistinct(z *zipf, n int64) float64 {
	e := 0.0
	for i := range z.ranks() {
		e += -math.Expm1(float64(n) * math.Log1p(-z.prob(i)))
	}
	return e
}

func TestTrainingTableStatistics(t *testing.T) {
	const rows = 1_000_000
	cfg := Config{Rows: rows, Seed: 7}
	s := collect(t, cfg, true)
	if s.rows != rows {
		t.Fatalf("%d rows, want %d", s.rows, rows)
	}
	// Nulls: 1% ± 0.05% (the binomial sd at 1e6 rows is 0.01%).
	if share := float64(s.nulls) / rows; math.Abs(share-0.01) > 0.0005 {
		t.Errorf("null share of dest_postcode %.4f, want 0.0100", share)
	}
	if rate := float64(s.late) / rows; rate < 0.10 || rate > 0.20 {
		t.Errorf("late rate %.4f, want 0.10..0.20", rate)
	}
	// Distinct postcodes: within 1% of the expectation under the sampler's
	// own probabilities, and never above the pool size.
	nw := newNetwork(cfg.Seed, DefaultPostcodes, DefaultAccounts)
	exp := expectedDistinct(nw.pcTrain.sampler, rows-s.nulls)
	if got := float64(len(s.postcodes)); math.Abs(got-exp) > 0.01*exp || got > DefaultPostcodes {
		t.Errorf("%v distinct postcodes, expected %.0f", got, exp)
	}
	expAc := expectedDistinct(nw.acTrain.sampler, rows)
	if got := float64(len(s.accounts)); math.Abs(got-expAc) > 0.01*expAc {
		t.Errorf("%v distinct accounts, expected %.0f", got, expAc)
	}
	t.Logf("distinct postcodes %d (expected %.0f), accounts %d (expected %.0f), prefixes %d, routes %d, late %.4f",
		len(s.postcodes), exp, len(s.accounts), expAc, len(s.prefixes), len(s.routes), float64(s.late)/rows)
	// ~Postcodes/40 region prefixes: 1000 at the default.
	if len(s.prefixes) != 1000 {
		t.Errorf("%d prefixes, want 1000", len(s.prefixes))
	}
	if len(s.routes) < 190 || len(s.routes) > routeCount {
		t.Errorf("%d routes, want about 200", len(s.routes))
	}
	if len(s.ids) != rows {
		t.Errorf("%d distinct shipment ids in %d rows", len(s.ids), rows)
	}
	// Parcel type shares within 0.5% of their targets.
	for _, pt := range parcelTypes {
		if share := float64(s.types[pt.name]) / rows; math.Abs(share-pt.share) > 0.005 {
			t.Errorf("parcel type %s: share %.4f, want %.2f", pt.name, share, pt.share)
		}
	}
	if len(s.types) != len(parcelTypes) {
		t.Errorf("parcel types %v", s.types)
	}
	// The top postcode takes the Zipf head's share: p(rank 1) = 1/H(n, 1.1).
	top := int64(0)
	for _, n := range s.postcodes {
		top = max(top, n)
	}
	if share, want := float64(top)/float64(rows-s.nulls), nw.pcTrain.sampler.prob(0); math.Abs(share-want) > 0.05*want {
		t.Errorf("top postcode share %.4f, want %.4f", share, want)
	}
	// Cost rises with weight: a positive slope for small parcels.
	if slope := olsSlope(s.costWeight[1], s.costWeight[0]); slope < 0.5 || slope > 1.3 {
		t.Errorf("cost per kg of small parcels %.3f, want about %.2f", slope, parcelTypes[1].perKg)
	}
}

// olsSlope returns the least-squares slope of y on x.
func olsSlope(x, y []float64) float64 {
	var mx, my float64
	for i := range x {
		mx += x[i]
		my += y[i]
	}
	mx /= float64(len(x))
	my /= float64(len(x))
	var sxy, sxx float64
	for i := range x {
		sxy += (x[i] - mx) * (y[i] - my)
		sxx += (x[i] - mx) * (x[i] - mx)
	}
	return sxy / sxx
}

func TestSmallPoolIsCovered(t *testing.T) {
	// With few levels and many rows every postcode appears.
	s := collect(t, Config{Rows: 300_000, Seed: 3, Postcodes: 2000, Accounts: 5000}, false)
	if len(s.postcodes) < 1990 || len(s.postcodes) > 2000 {
		t.Errorf("%d distinct postcodes, want about 2000", len(s.postcodes))
	}
	if len(s.prefixes) != 50 {
		t.Errorf("%d prefixes, want 2000/40 = 50", len(s.prefixes))
	}
	if len(s.accounts) < 4950 || len(s.accounts) > 5000 {
		t.Errorf("%d distinct accounts, want about 5000", len(s.accounts))
	}
}

func TestUnseenShare(t *testing.T) {
	train := Config{Rows: 300_000, Seed: 11, Postcodes: 2000, Accounts: 5000}
	tr := collect(t, train, true)
	for _, share := range []float64{0, 0.2, 0.5} {
		test := train
		test.Rows, test.Stream, test.UnseenShare = 100_000, 1, share
		te := collect(t, test, true)
		var newPC, newAC, pcRows int64
		for pc, n := range te.postcodes {
			pcRows += n
			if _, ok := tr.postcodes[pc]; !ok {
				newPC += n
			}
		}
		for ac, n := range te.accounts {
			if _, ok := tr.accounts[ac]; !ok {
				newAC += n
			}
		}
		pcShare, acShare := float64(newPC)/float64(pcRows), float64(newAC)/float64(te.rows)
		// The training sample covers its pools almost fully, so the share of
		// rows with levels it never saw is the unseen share (binomial sd at
		// 1e5 rows ≤ 0.16%).
		if math.Abs(pcShare-share) > 0.01 || math.Abs(acShare-share) > 0.01 {
			t.Errorf("UnseenShare %v: unseen postcode rows %.4f, unseen account rows %.4f", share, pcShare, acShare)
		}
		// Shipment ids of another stream never repeat the training ids.
		for id := range te.ids {
			if tr.ids[id] {
				t.Errorf("stream 1 repeats shipment id %s", id)
				break
			}
		}
	}
}

func TestUnseenPoolsDisjoint(t *testing.T) {
	for _, pcs := range []int{1, 40, 2000, 40000, 60000, 99000} {
		nw := newNetwork(5, pcs, 1000)
		seen := map[string]bool{}
		for i := range nw.pcTrain.sampler.ranks() {
			seen[string(nw.pcTrain.codes[5*i:5*i+5])] = true
		}
		if len(seen) != pcs {
			t.Errorf("%d postcodes: %d distinct training codes", pcs, len(seen))
		}
		u := unseenPostcodes(pcs)
		if (pcs <= 40000 && u != pcs) || u == 0 {
			t.Errorf("%d postcodes: unseen pool of %d", pcs, u)
		}
		for i := range u {
			c := string(nw.pcUnseen.codes[5*i : 5*i+5])
			if seen[c] {
				t.Fatalf("%d postcodes: unseen code %s is a training code", pcs, c)
			}
			seen[c] = true
		}
		if len(seen) != pcs+u {
			t.Errorf("%d postcodes: unseen codes repeat", pcs)
		}
	}
	nw := newNetwork(5, 100, 1000)
	acc := map[uint64]bool{}
	for r := range 1000 {
		acc[nw.acTrain.number(r)] = true
	}
	for r := range 1000 {
		if n := nw.acUnseen.number(r); acc[n] || n < 1000 || n >= 2000 {
			t.Fatalf("unseen account %d overlaps the training pool", n)
		}
		acc[nw.acUnseen.number(r)] = true
	}
	if len(acc) != 2000 {
		t.Errorf("account numbers repeat: %d distinct of 2000", len(acc))
	}
}

// TestLateDependsOnPostcode checks that the binary target carries the
// postcode signal: rows in the top decile of postcode effect run late
// clearly more often than those in the bottom decile, and the same holds
// for the region prefix alone.
func TestLateDependsOnPostcode(t *testing.T) {
	cfg := Config{Rows: 400_000, Seed: 9}
	nw := newNetwork(cfg.Seed, DefaultPostcodes, DefaultAccounts)
	effect := map[string]float64{}
	prefixEffect := map[string]float64{}
	for i := range nw.pcTrain.sampler.ranks() {
		code := string(nw.pcTrain.codes[5*i : 5*i+5])
		effect[code] = nw.pcTrain.late[i]
		// The prefix effect is shared by the prefix's postcodes; recover it
		// as their mean (own effects average out over ~40 postcodes).
		prefixEffect[code[:3]] += nw.pcTrain.late[i] / postcodesPer
	}
	s := collect(t, cfg, false)
	type cell struct {
		eff        float64
		rows, late int64
	}
	decileRates := func(cells []cell) (bottom, top float64) {
		slices.SortFunc(cells, func(a, b cell) int { return cmpFloat(a.eff, b.eff) })
		var total int64
		for _, c := range cells {
			total += c.rows
		}
		var acc, lo, loL, hi, hiL int64
		for _, c := range cells {
			switch {
			case acc < total/10:
				lo, loL = lo+c.rows, loL+c.late
			case acc >= total-total/10:
				hi, hiL = hi+c.rows, hiL+c.late
			}
			acc += c.rows
		}
		return float64(loL) / float64(lo), float64(hiL) / float64(hi)
	}
	var byPC []cell
	byPrefix := map[string]*cell{}
	for pc, lb := range s.lateByPostcode {
		byPC = append(byPC, cell{effect[pc], lb[0], lb[1]})
		p := byPrefix[pc[:3]]
		if p == nil {
			p = &cell{eff: prefixEffect[pc[:3]]}
			byPrefix[pc[:3]] = p
		}
		p.rows += lb[0]
		p.late += lb[1]
	}
	lo, hi := decileRates(byPC)
	t.Logf("late rate by postcode effect: bottom decile %.4f, top decile %.4f", lo, hi)
	if hi < 2*lo {
		t.Errorf("late rate of the top postcode decile %.4f is not clearly above the bottom decile %.4f", hi, lo)
	}
	var prefixCells []cell
	for _, c := range byPrefix {
		prefixCells = append(prefixCells, *c)
	}
	lo, hi = decileRates(prefixCells)
	t.Logf("late rate by prefix effect: bottom decile %.4f, top decile %.4f", lo, hi)
	if hi < 1.5*lo {
		t.Errorf("late rate of the top prefix decile %.4f is not clearly above the bottom decile %.4f", hi, lo)
	}
}

func cmpFloat(a, b float64) int {
	switch {
	case a < b:
		return -1
	case a > b:
		return 1
	}
	return 0
}

func TestShipmentNumberIsBijective(t *testing.T) {
	g := newGenerator(Config{Rows: 1, Seed: 1, Postcodes: 10, Accounts: 10, BatchRows: 1})
	seen := map[uint64]bool{}
	for _, stream := range []uint64{0, 1, 1023} {
		g.stream = stream
		for _, base := range []uint64{0, 1 << 39, 1<<40 - 5000} {
			for r := base; r < base+5000; r++ {
				v := g.shipmentNumber(r)
				if v >= 1<<50 || seen[v] {
					t.Fatalf("stream %d row %d: number %d repeats or exceeds 2^50", stream, r, v)
				}
				seen[v] = true
			}
		}
	}
}

func TestNoAllocationsPerBatch(t *testing.T) {
	cfg, err := Config{Rows: 1 << 20, Seed: 1, BatchRows: 4096}.withDefaults()
	if err != nil {
		t.Fatal(err)
	}
	g := newGenerator(cfg)
	allocs := testing.AllocsPerRun(5, func() { g.fill(12345, 4096) })
	if allocs != 0 {
		t.Errorf("fill allocates %v times per batch", allocs)
	}
}

func BenchmarkGenerate(b *testing.B) {
	for _, bc := range []struct {
		name string
		cfg  Config
	}{
		{"default", Config{Seed: 1}},
		{"accounts1M", Config{Seed: 1, Accounts: 1_000_000}},
		{"accounts1M_unseen20", Config{Seed: 1, Accounts: 1_000_000, UnseenShare: 0.2}},
	} {
		b.Run(bc.name, func(b *testing.B) {
			cfg := bc.cfg
			cfg.Rows = 1 << 20
			discard := funcWriter(func(*table.Batch) error { return nil })
			runs := 0
			cpu0 := cpuSeconds()
			for b.Loop() {
				if err := Generate(cfg, discard); err != nil {
					b.Fatal(err)
				}
				runs++
			}
			rows := float64(cfg.Rows) * float64(runs)
			b.ReportMetric(rows/b.Elapsed().Seconds(), "rows/s")
			// CPU time shows the generator's own speed when other work
			// shares the machine.
			if cpu := cpuSeconds() - cpu0; cpu0 > 0 && cpu > 0 {
				b.ReportMetric(rows/cpu, "rows/cpu-s")
			}
		})
	}
}
