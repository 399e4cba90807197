package metrics

import (
	"math"
	"math/rand/v2"
	"testing"
)

// near reports whether got is within tol of want; NaN matches NaN.
func near(got, want, tol float64) bool {
	if math.IsNaN(want) {
		return math.IsNaN(got)
	}
	return math.Abs(got-want) <= tol
}

var (
	nan         = math.NaN()
	oneMinusEps = 1 - Eps // rounded to float64, as LogLoss's clip does
)

func TestBinaryMetrics(t *testing.T) {
	tests := []struct {
		name string
		fn   func(y, p []float64) float64
		y, p []float64
		want float64
	}{
		// Reference check value (team notes, encoding-math.md "Metrics",
		// computed from -(1/N) Σ y ln p + (1-y) ln(1-p)).
		{"logloss reference", LogLoss, []float64{1, 0, 1}, []float64{0.9, 0.2, 0.6}, 0.2797765635793423},
		// Clipping: p = 0 for a positive costs -ln(Eps); computed from the formula.
		{"logloss clip 0", LogLoss, []float64{1}, []float64{0}, -math.Log(1e-15)},
		// p = 1 for a negative: 1-p is taken in float64 after clipping, so the
		// cost is -ln(1 - float64(1-Eps)), a little above -ln(Eps).
		{"logloss clip 1", LogLoss, []float64{0}, []float64{1}, -math.Log(1 - oneMinusEps)},
		{"logloss perfect", LogLoss, []float64{1, 0}, []float64{1, 0}, -math.Log(oneMinusEps)},
		{"logloss empty", LogLoss, nil, nil, nan},
		{"logloss lengths", LogLoss, []float64{1, 0}, []float64{0.5}, nan},
		{"logloss NaN p", LogLoss, []float64{1, 0}, []float64{nan, 0.5}, nan},
		{"logloss NaN y", LogLoss, []float64{nan, 0}, []float64{0.5, 0.5}, nan},
		// Brier: (0.1² + 0.2² + 0.4²)/3, computed from the formula.
		{"brier", Brier, []float64{1, 0, 1}, []float64{0.9, 0.2, 0.6}, 0.07},
		{"brier empty", Brier, nil, nil, nan},
		{"brier lengths", Brier, []float64{1}, nil, nan},
		{"brier NaN", Brier, []float64{1}, []float64{nan}, nan},
		// Reference check value (encoding-math.md "Metrics", computed).
		{"rmse reference", RMSE, []float64{3, 5, 2.5}, []float64{2.5, 5, 4}, 0.9128709291752769},
		{"rmse empty", RMSE, nil, nil, nan},
		{"rmse lengths", RMSE, []float64{1, 2}, []float64{1}, nan},
		{"rmse NaN", RMSE, []float64{1}, []float64{nan}, nan},
		// MAE and R² on y=[3,-0.5,2,7], yhat=[2.5,0,2,8]: SS_res = 1.5,
		// ȳ = 2.875, SS_tot = 29.1875; computed from the formulas.
		{"mae", MAE, []float64{3, -0.5, 2, 7}, []float64{2.5, 0, 2, 8}, 0.5},
		{"mae empty", MAE, nil, nil, nan},
		{"mae NaN", MAE, []float64{1}, []float64{nan}, nan},
		{"r2", R2, []float64{3, -0.5, 2, 7}, []float64{2.5, 0, 2, 8}, 1 - 1.5/29.1875},
		{"r2 perfect", R2, []float64{1, 2, 3}, []float64{1, 2, 3}, 1},
		{"r2 mean predictor", R2, []float64{1, 2, 3}, []float64{2, 2, 2}, 0},
		{"r2 worse than mean", R2, []float64{1, 2, 3}, []float64{3, 2, 1}, -3},
		{"r2 constant y", R2, []float64{2, 2, 2}, []float64{1, 2, 3}, nan},
		{"r2 one row", R2, []float64{2}, []float64{1}, nan},
		{"r2 empty", R2, nil, nil, nan},
		{"r2 NaN", R2, []float64{1, 2}, []float64{nan, 2}, nan},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			if got := tc.fn(tc.y, tc.p); !near(got, tc.want, 1e-12) {
				t.Errorf("got %.17g, want %.17g", got, tc.want)
			}
		})
	}
}

// labelled builds (y, score) from positive and negative scores.
func labelled(pos, neg []float64) (y, s []float64) {
	for _, v := range pos {
		y, s = append(y, 1), append(s, v)
	}
	for _, v := range neg {
		y, s = append(y, 0), append(s, v)
	}
	return y, s
}

func TestAUC(t *testing.T) {
	// Hanley & McNeil, Radiology 143 (1982), rating table: ratings 1..5,
	// negatives 30,19,8,2,1 and positives 5,6,5,12,22; the Mann-Whitney
	// value 1291/1500 is from the team reference notes ("computed").
	var hmPos, hmNeg []float64
	for r, n := range []int{30, 19, 8, 2, 1} {
		for range n {
			hmNeg = append(hmNeg, float64(r+1))
		}
	}
	for r, n := range []int{5, 6, 5, 12, 22} {
		for range n {
			hmPos = append(hmPos, float64(r+1))
		}
	}
	tests := []struct {
		name     string
		pos, neg []float64
		want     float64
	}{
		// encoding-math.md "Metrics": 5/6 [computed].
		{"reference ties", []float64{0.8, 0.4, 0.4}, []float64{0.4, 0.1}, 5.0 / 6},
		{"hanley mcneil table", hmPos, hmNeg, 1291.0 / 1500},
		{"perfect", []float64{3, 4}, []float64{1, 2}, 1},
		{"reversed", []float64{1, 2}, []float64{3, 4}, 0},
		{"all tied", []float64{1, 1}, []float64{1, 1, 1}, 0.5},
		{"infinite scores", []float64{math.Inf(1)}, []float64{math.Inf(-1), 0}, 1},
		{"no negatives", []float64{0.3, 0.7}, nil, nan},
		{"no positives", nil, []float64{0.3, 0.7}, nan},
		{"empty", nil, nil, nan},
		{"NaN score", []float64{nan, 0.7}, []float64{0.1}, nan},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			y, s := labelled(tc.pos, tc.neg)
			if got := AUC(y, s); !near(got, tc.want, 1e-15) {
				t.Errorf("got %.17g, want %.17g", got, tc.want)
			}
		})
	}
	t.Run("hanley mcneil value", func(t *testing.T) {
		// 1291/1500 printed by the reference as 0.8606666666666667.
		y, s := labelled(hmPos, hmNeg)
		if got := AUC(y, s); got != 0.8606666666666667 {
			t.Errorf("got %.17g", got)
		}
	})
	t.Run("bad label", func(t *testing.T) {
		if got := AUC([]float64{1, 0, 2}, []float64{1, 2, 3}); !math.IsNaN(got) {
			t.Errorf("label 2: got %v, want NaN", got)
		}
		if got := AUC([]float64{1, nan}, []float64{1, 2}); !math.IsNaN(got) {
			t.Errorf("NaN label: got %v, want NaN", got)
		}
		if got := AUC([]float64{1, 0}, []float64{1}); !math.IsNaN(got) {
			t.Errorf("lengths: got %v, want NaN", got)
		}
	})
	t.Run("inputs unchanged", func(t *testing.T) {
		y := []float64{1, 0, 1, 0}
		s := []float64{0.9, 0.1, 0.2, 0.8}
		AUC(y, s)
		if s[0] != 0.9 || s[3] != 0.8 || y[1] != 0 {
			t.Errorf("AUC modified its input: %v %v", y, s)
		}
	})
}

// bruteAUC is the O(n²) Mann-Whitney count over all positive-negative pairs.
func bruteAUC(y, s []float64) float64 {
	var wins, pairs float64
	for i := range y {
		if y[i] != 1 {
			continue
		}
		for j := range y {
			if y[j] != 0 {
				continue
			}
			pairs++
			switch {
			case s[i] > s[j]:
				wins++
			case s[i] == s[j]:
				wins += 0.5
			}
		}
	}
	return wins / pairs
}

func TestAUCBruteForce(t *testing.T) {
	r := rand.New(rand.NewPCG(7, 11))
	for trial := range 200 {
		n := 2 + r.IntN(300)
		levels := 1 + r.IntN(20) // few distinct scores: many ties
		y := make([]float64, n)
		s := make([]float64, n)
		y[0], y[1] = 0, 1
		for i := 2; i < n; i++ {
			if r.Float64() < 0.3 {
				y[i] = 1
			}
		}
		for i := range s {
			s[i] = float64(r.IntN(levels)) / 4
		}
		got, want := AUC(y, s), bruteAUC(y, s)
		if math.Abs(got-want) > 1e-12 {
			t.Fatalf("trial %d (n=%d): AUC %.17g, brute force %.17g", trial, n, got, want)
		}
		// Row order does not matter.
		r.Shuffle(n, func(i, j int) { y[i], y[j] = y[j], y[i]; s[i], s[j] = s[j], s[i] })
		if again := AUC(y, s); again != got {
			t.Fatalf("trial %d: shuffled rows give %.17g, want %.17g", trial, again, got)
		}
	}
}

func TestMultiClass(t *testing.T) {
	// Four classes, class 3 absent. One-vs-rest AUCs counted by hand:
	// class 0: positives 0.7, 0.4 vs negatives 0.3, 0.5 -> 3/4;
	// class 1: 0.5 vs 0.2, 0.4, 0.3 -> 1; class 2: 0.2 vs 0.1, 0.2, 0.2 -> 2/3.
	y := []int{0, 0, 1, 2}
	p := [][]float64{
		{0.7, 0.2, 0.1, 0},
		{0.4, 0.4, 0.2, 0},
		{0.3, 0.5, 0.2, 0},
		{0.5, 0.3, 0.2, 0},
	}
	if got, want := MeanOvRAUC(y, p), (0.75+1+2.0/3)/3; !near(got, want, 1e-15) {
		t.Errorf("MeanOvRAUC = %.17g, want %.17g", got, want)
	}
	// Argmax: rows 0 -> 0 (hit), 1 -> 0 (tie 0.4/0.4 goes to class 0: hit),
	// 2 -> 1 (hit), 3 -> 0 (miss).
	if got := Accuracy(y, p); got != 0.75 {
		t.Errorf("Accuracy = %v, want 0.75", got)
	}
	// -(ln 0.7 + ln 0.4 + ln 0.5 + ln 0.2)/4, computed from the formula.
	want := -(math.Log(0.7) + math.Log(0.4) + math.Log(0.5) + math.Log(0.2)) / 4
	if got := MultiLogLoss(y, p); !near(got, want, 1e-15) {
		t.Errorf("MultiLogLoss = %.17g, want %.17g", got, want)
	}

	bad := []struct {
		name string
		y    []int
		p    [][]float64
	}{
		{"empty", nil, nil},
		{"lengths", []int{0, 1}, [][]float64{{1, 0}}},
		{"ragged", []int{0, 1}, [][]float64{{1, 0}, {1}}},
		{"zero classes", []int{0}, [][]float64{{}}},
		{"label high", []int{0, 2}, [][]float64{{1, 0}, {0, 1}}},
		{"label negative", []int{0, -1}, [][]float64{{1, 0}, {0, 1}}},
		{"NaN", []int{0, 1}, [][]float64{{nan, nan}, {nan, nan}}},
	}
	for _, tc := range bad {
		t.Run(tc.name, func(t *testing.T) {
			for name, fn := range map[string]func([]int, [][]float64) float64{
				"MultiLogLoss": MultiLogLoss, "Accuracy": Accuracy, "MeanOvRAUC": MeanOvRAUC,
			} {
				if got := fn(tc.y, tc.p); !math.IsNaN(got) {
					t.Errorf("%s = %v, want NaN", name, got)
				}
			}
		})
	}
	t.Run("one class present", func(t *testing.T) {
		if got := MeanOvRAUC([]int{1, 1}, [][]float64{{0.2, 0.8}, {0.6, 0.4}}); !math.IsNaN(got) {
			t.Errorf("MeanOvRAUC = %v, want NaN", got)
		}
		if got := Accuracy([]int{1, 1}, [][]float64{{0.2, 0.8}, {0.6, 0.4}}); got != 0.5 {
			t.Errorf("Accuracy = %v, want 0.5", got)
		}
	})
}

// With two classes and p[i][0] = 1 - p[i][1], the multi-class metrics equal
// the binary ones on p[i][1].
func TestMultiClassMatchesBinary(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 5))
	n := 500
	yi := make([]int, n)
	yf := make([]float64, n)
	p1 := make([]float64, n)
	p := make([][]float64, n)
	for i := range n {
		yi[i] = r.IntN(2)
		yf[i] = float64(yi[i])
		p1[i] = float64(r.IntN(50)) / 50
		p[i] = []float64{1 - p1[i], p1[i]}
	}
	if a, b := MeanOvRAUC(yi, p), AUC(yf, p1); !near(a, b, 1e-12) {
		t.Errorf("MeanOvRAUC %.17g, AUC %.17g", a, b)
	}
	if a, b := MultiLogLoss(yi, p), LogLoss(yf, p1); !near(a, b, 1e-12) {
		t.Errorf("MultiLogLoss %.17g, LogLoss %.17g", a, b)
	}
}

func TestMeanStd(t *testing.T) {
	tests := []struct {
		name      string
		xs        []float64
		mean, std float64
	}{
		// Sample std of 2,4,4,4,5,5,7,9: Σ(x-5)² = 32, sqrt(32/7); computed.
		{"eight values", []float64{2, 4, 4, 4, 5, 5, 7, 9}, 5, math.Sqrt(32.0 / 7)},
		{"two values", []float64{1, 3}, 2, math.Sqrt2},
		{"one value", []float64{4.5}, 4.5, 0},
		{"constant", []float64{0.1, 0.1, 0.1}, 0.1, 0},
		{"empty", nil, nan, nan},
		{"NaN", []float64{1, nan}, nan, nan},
		{"NaN one value", []float64{nan}, nan, nan},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			m, s := MeanStd(tc.xs)
			if !near(m, tc.mean, 1e-15) || !near(s, tc.std, 1e-15) {
				t.Errorf("got (%.17g, %.17g), want (%.17g, %.17g)", m, s, tc.mean, tc.std)
			}
		})
	}
}
