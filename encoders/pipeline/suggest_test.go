package pipeline_test

import (
	"fmt"
	"math"
	"math/rand/v2"
	"strconv"
	"strings"
	"testing"
	"time"

	"manyfold/encoders/pipeline"
	"manyfold/io/table"
)

// TestScanSuggestions checks scan's rule (README, "See what the columns
// look like") column by column on generated columns, each made to meet
// one rule and not the ones before it. The rule is our own; what the test
// checks against it is recomputed from the generated rows: the share of
// rows with a level seen once, the level counts.
func TestScanSuggestions(t *testing.T) {
	const n = 20000
	rng := rand.New(rand.NewPCG(3, 9))
	fields := []table.Field{
		{Name: "minutes", Kind: table.Int64},  // a delay in whole minutes, 0 and up: smooth counts
		{Name: "early", Kind: table.Int64},    // minutes early or late: values below zero
		{Name: "rating", Kind: table.Float64}, // 0.5 to 5 in halves: fractions
		{Name: "store", Kind: table.Int64},    // 300 store numbers with counts that ignore their neighbours
		{Name: "zone", Kind: table.Int64},     // 8 zone numbers
		{Name: "tracking", Kind: table.String},
		{Name: "shipment_id", Kind: table.String},
		{Name: "day", Kind: table.String},
		{Name: "tier", Kind: table.String},
		{Name: "late", Kind: table.Int64},
	}
	weight := make([]float64, 301) // store s's weight, lognormal, drawn independently per store
	var total float64
	for s := 1; s <= 300; s++ {
		weight[s] = math.Exp(rng.NormFloat64())
		total += weight[s]
	}
	store := func() int {
		u := rng.Float64() * total
		for s := 1; s <= 300; s++ {
			if u -= weight[s]; u < 0 {
				return s
			}
		}
		return 300
	}
	day0 := time.Date(2026, 1, 1, 0, 0, 0, 0, time.UTC)
	mt := memTable{schema: &table.Schema{Fields: fields}}
	once := map[string]int{}
	for i := range n {
		tracking := "T" + strconv.Itoa(i)
		if i%200 == 0 {
			tracking = "T-shared" // 100 rows share a level: 19,900 of 20,000 rows seen once
		}
		once[tracking]++
		mt.rows = append(mt.rows, []string{
			strconv.Itoa(max(0, int(math.Round(60+15*rng.NormFloat64())))),
			strconv.Itoa(int(math.Round(10 * rng.NormFloat64()))),
			strconv.FormatFloat(float64(1+rng.IntN(10))/2, 'f', 1, 64),
			strconv.Itoa(store()),
			strconv.Itoa(1 + rng.IntN(8)),
			tracking,
			fmt.Sprintf("S%06d", i),
			day0.AddDate(0, 0, i%365).Format("2006-01-02"),
			fmt.Sprintf("tier-%02d", rng.IntN(40)),
			strconv.Itoa(rng.IntN(2)),
		})
	}
	seenOnce := 0
	for _, c := range once {
		if c == 1 {
			seenOnce++
		}
	}
	cols := make([]int, len(fields))
	for i := range cols {
		cols[i] = i
	}
	ps, err := pipeline.Scan(table.NewMemReader(mt.schema, mt.batches(4096, false)...), cols, 3, nil)
	if err != nil {
		t.Fatal(err)
	}
	pipeline.MarkTarget(ps, "late")
	want := []struct {
		suggest string
		reason  string // a piece of the reason
	}{
		{"numeric", "neighbouring values have alike row counts"},
		{"numeric", "values below zero"},
		{"numeric", "fractional values"},
		{"target:eb+freq", "300 levels with repeats"},
		{"topk:8", "if the values are amounts, use the column as a number instead"},
		{"drop", fmt.Sprintf("%.1f%% of rows have a level seen once", 100*float64(seenOnce)/n)},
		{"drop", "every row has a level of its own"},
		{"time", "365 distinct dates or times"},
		{"topk:40", "40 levels: one code each"},
		{"target", "the target column"},
	}
	for i, p := range ps {
		if p.Suggest != want[i].suggest || !strings.Contains(p.Reason, want[i].reason) {
			t.Errorf("%s: suggested %s, %q; want %s, with %q", p.Name, p.Suggest, p.Reason, want[i].suggest, want[i].reason)
		}
		if strings.ContainsAny(p.Reason, "()") {
			t.Errorf("%s: the reason %q holds parentheses", p.Name, p.Reason)
		}
	}
	if got := ps[5].RowsOnce; got != float64(seenOnce)/n {
		t.Errorf("tracking: share of rows seen once %v, want %v", got, float64(seenOnce)/n)
	}
	// Without a target, the 0/1 column is a column like any other.
	ps, err = pipeline.Scan(table.NewMemReader(mt.schema, mt.batches(4096, true)...), cols[9:], 3, nil)
	if err != nil {
		t.Fatal(err)
	}
	if ps[0].Suggest != "topk:2" {
		t.Errorf("late without --target: suggested %s, want topk:2", ps[0].Suggest)
	}
}
