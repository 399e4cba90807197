package compare_test

import (
	"fmt"
	"math"
	"strings"
	"testing"

	"manyfold/internal/evaluate/compare"
	"manyfold/io/csvio"
)

// routeTable is the parcel network's generated table of the example: 400
// shipments over 10 routes, 40 each in turn (row i takes route R(i mod
// 10)); on routes R0-R4 a parcel is late except every tenth one, on
// R5-R9 only every tenth one is late.
func routeTable() string {
	var b strings.Builder
	b.WriteString("shipment_id,route,late\n")
	for i := 0; i < 400; i++ {
		r, j := i%10, i/10
		late := j%10 != 0
		if r >= 5 {
			late = !late
		}
		l := 0
		if late {
			l = 1
		}
		fmt.Fprintf(&b, "S%04d,R%d,%d\n", i, r, l)
	}
	return b.String()
}

// Run scores each candidate encoding of a column on held-out folds, beside
// the prior baseline (the overall late rate), and names the winner: the
// simplest of the candidates the corrected resampled t-test over the outer
// folds cannot tell from the best, when it beats the prior. Here the route carries the target (a late rate of 0.9 on
// five routes, 0.1 on the others, as TestExampleRouteRates checks) and
// hash:1 carries nothing: one bucket holds every route, so its model
// predicts one value for every row and its AUC is 0.5 on every fold (every
// pair of a late and an on-time row is a tie). target:m=1 wins. The encode
// command carries the verdict out: the winner per column, the seed, the
// output and the mapping tables beside the input (internal/cmdline.Encode).
func ExampleRun() {
	r, err := csvio.NewReader(strings.NewReader(routeTable()), "parcels.csv", csvio.Options{Delimiter: ','})
	if err != nil {
		fmt.Println(err)
		return
	}
	cands, err := compare.ParseCandidates("prior,target:m=1,hash:1")
	if err != nil {
		fmt.Println(err)
		return
	}
	res, err := compare.Run(r, compare.Options{
		File: "parcels.csv", Target: "late", Columns: []string{"route"},
		Candidates: cands, Folds: 5, InnerFolds: 5, Seed: 3, NoTimings: true,
	})
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, c := range res.Columns {
		for _, k := range c.Candidates {
			switch {
			case k.Winner:
				fmt.Printf("%s: %s wins\n", c.Column, k.Name)
			case k.Name == "hash:1":
				fmt.Printf("%s: %s, %s per fold %v\n", c.Column, k.Name, res.Metric, k.PerFold)
			}
		}
	}
	fmt.Println(res.EncodeCommand)
	// Output:
	// route: target:m=1 wins
	// route: hash:1, auc per fold [0.5 0.5 0.5 0.5 0.5]
	// manyfold encode parcels.csv --target late --methods route=target:m=1 --seed 3 --out parcels_encoded.csv --tables parcels_tables
}

// TestExampleRouteRates checks what ExampleRun says of routeTable: 40
// rows per route, late rates 0.9 on R0-R4 and 0.1 on R5-R9.
func TestExampleRouteRates(t *testing.T) {
	lines := strings.Split(strings.TrimSpace(routeTable()), "\n")[1:]
	late, rows := map[string]float64{}, map[string]float64{}
	for _, l := range lines {
		f := strings.Split(l, ",")
		rows[f[1]]++
		if f[2] == "1" {
			late[f[1]]++
		}
	}
	if len(rows) != 10 {
		t.Fatalf("%d routes, want 10", len(rows))
	}
	for r, n := range rows {
		want := 0.9
		if r >= "R5" {
			want = 0.1
		}
		if n != 40 || math.Abs(late[r]/n-want) > 1e-12 {
			t.Errorf("route %s: %v rows, late rate %v; want 40 rows, rate %v", r, n, late[r]/n, want)
		}
	}
}
