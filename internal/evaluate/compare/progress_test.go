package compare

import (
	"strings"
	"sync"
	"testing"
)

// TestModelSteps: Options.Models hears the start of each column and every
// model fitted, in order, with the candidate under way never going back
// and the last call at every model of every column, with one thread and
// with several.
func TestModelSteps(t *testing.T) {
	text, _ := idTable(600, 3)
	text = strings.Replace(text, "shipment_id,", "shipment_id,prefix,", 1)
	lines := strings.Split(text, "\n")
	for i := 1; i < len(lines)-1; i++ {
		id, late, _ := strings.Cut(lines[i], ",")
		lines[i] = id + "," + id[:1] + "," + late // a second column: the id's first hex digit
	}
	text = strings.Join(lines, "\n")
	for _, threads := range []int{1, 3} {
		var mu sync.Mutex
		var steps []ModelStep
		opt := Options{Target: "late", Columns: []string{"shipment_id", "prefix"}, Folds: 3, InnerFolds: 2,
			NoTimings: true, Threads: threads, Models: func(s ModelStep) {
				mu.Lock()
				steps = append(steps, s)
				mu.Unlock()
			}}
		if _, err := Run(csvReader(t, text), opt); err != nil {
			t.Fatal(err)
		}
		cands, _ := ParseCandidates(DefaultCandidates)
		total := 2 * len(cands) * 3
		if len(steps) != total+2 { // one call per model, one at the start of each column
			t.Fatalf("threads %d: %d calls, want %d", threads, len(steps), total+2)
		}
		for i, s := range steps {
			if s.Models != total || s.Candidates != len(cands) || s.Columns != 2 || s.Column != opt.Columns[s.ColumnNum-1] {
				t.Fatalf("threads %d: call %d: %+v", threads, i, s)
			}
			if i > 0 && (s.ModelsDone < steps[i-1].ModelsDone || (s.ColumnNum == steps[i-1].ColumnNum && s.Candidate < steps[i-1].Candidate)) {
				t.Errorf("threads %d: call %d went back: %+v after %+v", threads, i, s, steps[i-1])
			}
		}
		first, last := steps[0], steps[len(steps)-1]
		if first.ModelsDone != 0 || first.ColumnNum != 1 || first.Candidate != 1 {
			t.Errorf("threads %d: first call %+v, want column 1, candidate 1, 0 models", threads, first)
		}
		if last.ModelsDone != total || last.ColumnNum != 2 || last.Candidate != len(cands) {
			t.Errorf("threads %d: last call %+v, want column 2, candidate %d, %d models", threads, last, len(cands), total)
		}
	}
}
