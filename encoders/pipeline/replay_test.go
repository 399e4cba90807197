package pipeline

import (
	"fmt"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"manyfold/io/table"
	"manyfold/io/tableio"
)

// TestReplayRecord records slot sequences batch by batch and checks which
// records are kept and that a kept one gives the same slots back, whatever
// the batch sizes of the reading pass.
func TestReplayRecord(t *testing.T) {
	unique := func(n int) []int32 { // slot 0 is the null level
		s := make([]int32, n)
		for i := range s {
			s[i] = int32(i + 1)
		}
		return s
	}
	mostlyNew := func(n, every int) []int32 {
		var s []int32
		next := int32(1)
		for i := 0; i < n; i++ {
			switch {
			case i%every == every-1:
				s = append(s, int32(1+i%int(next-1))) // a level seen before
			case i%97 == 5:
				s = append(s, 0) // null
			default:
				s = append(s, next)
				next++
			}
		}
		return s
	}
	fewLevels := make([]int32, 200000)
	for i := range fewLevels {
		fewLevels[i] = int32(1 + i%300)
		if i < 300 {
			fewLevels[i] = int32(i + 1)
		}
	}
	cases := []struct {
		name  string
		slots []int32
		batch int
		kept  bool
	}{
		{"unique", unique(100000), 4096, true},
		{"one batch", unique(10), 64, true},
		{"a repeat in 50, nulls", mostlyNew(200000, 50), 30000, true},
		{"a repeat in 10", mostlyNew(200000, 10), 30000, false},
		{"few levels, short", fewLevels[:60000], 60000, true}, // kept until replayMinRows
		{"few levels", fewLevels, 30000, false},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			r := newReplay(1)
			kept := true
			for at := 0; at < len(tc.slots) && kept; at += tc.batch {
				kept = r.record(tc.slots[at:min(at+tc.batch, len(tc.slots))])
			}
			if kept != tc.kept {
				t.Fatalf("kept = %v, want %v (%d of %d rows repeat a level)", kept, tc.kept, len(r.seen), r.rows)
			}
			if !kept {
				return
			}
			if limit := max(r.rows/16, replayMinRows); int64(len(r.seen)) > limit {
				t.Errorf("%d repeated slots kept, more than %d", len(r.seen), limit)
			}
			for _, size := range []int{1, 7, 1000, len(tc.slots)} {
				c := r.start()
				var got []int32
				for len(got) < len(tc.slots) {
					dst := make([]int32, min(size, len(tc.slots)-len(got)))
					if !c.fill(dst) {
						t.Fatalf("batches of %d: fill failed after %d rows", size, len(got))
					}
					got = append(got, dst...)
				}
				if !reflect.DeepEqual(got, tc.slots) {
					t.Fatalf("batches of %d: replayed slots differ from the recorded ones", size)
				}
				if c.fill(make([]int32, 1)) {
					t.Errorf("batches of %d: fill past the recorded rows succeeded", size)
				}
			}
		})
	}
}

// collect is a table.Writer that keeps copies of the batches it gets.
type collect struct{ batches []*table.Batch }

func (c *collect) Write(b *table.Batch) error {
	cp := &table.Batch{}
	table.CopyBatch(cp, b)
	c.batches = append(c.batches, cp)
	return nil
}
func (c *collect) Close() error { return nil }

// TestEncodeReplayMatchesLookup encodes a table with a nearly unique id
// column (repeats and nulls among the ids) twice, once with the slots the
// fit recorded and once looking every value up, and checks that every
// output value is the same.
func TestEncodeReplayMatchesLookup(t *testing.T) {
	var sb strings.Builder
	sb.WriteString("shipment_id,dest_postcode,late\n")
	const rows = 150000
	for i := 0; i < rows; i++ {
		id := fmt.Sprintf("S%07d", (i*7919)%rows)
		switch {
		case i%40 == 39:
			id = fmt.Sprintf("S%07d", ((i-17)*7919)%rows) // seen 17 rows earlier
		case i%301 == 3:
			id = ""
		}
		fmt.Fprintf(&sb, "%s,%05d,%d\n", id, (i*31)%700, (i/3+i%7)%2)
	}
	path := filepath.Join(t.TempDir(), "shipments.csv")
	if err := os.WriteFile(path, []byte(sb.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	sp := DefaultSpec()
	sp.Target, sp.Columns = "late", []string{"shipment_id", "dest_postcode"}
	sp.Encodings = mustPlan(t, "target:eb+freq")
	encode := func(t *testing.T, replayed bool) []*table.Batch {
		r, err := tableio.Open(path, tableio.ReadOptions{})
		if err != nil {
			t.Fatal(err)
		}
		m, err := Fit(r, sp, FitOptions{File: path, Threads: 2})
		r.Close()
		if err != nil {
			t.Fatal(err)
		}
		if got := m.Cols[0].replay != nil; !got {
			t.Fatal("the id column has no record of its slots")
		}
		if m.Cols[1].replay != nil {
			t.Error("the postcode column (700 levels) kept a record of its slots")
		}
		if !replayed {
			m.Cols[0].replay = nil
		}
		if r, err = tableio.Open(path, tableio.ReadOptions{}); err != nil {
			t.Fatal(err)
		}
		defer r.Close()
		var out collect
		if _, err := m.Encode(r, &out, EncodeOptions{File: path, Threads: 2}); err != nil {
			t.Fatal(err)
		}
		return out.batches
	}
	got, want := encode(t, true), encode(t, false)
	if len(got) != len(want) || len(got) < 2 {
		t.Fatalf("%d batches with the record, %d without (want several)", len(got), len(want))
	}
	for i := range got {
		if !reflect.DeepEqual(got[i].Cols, want[i].Cols) {
			t.Fatalf("batch %d differs between the recorded slots and the lookups", i)
		}
	}
}
