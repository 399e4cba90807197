package method

import (
	"encoding/json"
	"fmt"
	"strconv"

	"manyfold/encoders/colstats"
	"manyfold/internal/strictjson"
	"manyfold/io/table"
)

// topKMethod codes the k most frequent levels 1..k: topk[:K][:min=N]
// (default K 100). Levels are ranked by rows, most first, ties by their
// bytes (colstats.Stats.TopK); a level needs at least N rows (default 1)
// for a code. Every other level, unseen or left out, is 0, "other".
type topKMethod struct{}

func (topKMethod) Syntax() string { return "topk[:K][:min=N]" }

func (topKMethod) Summary() string {
	return "codes 1..K of the K most frequent levels (default 100), 0 = other: <col>_topk"
}

func (topKMethod) Name() string { return "topk" }

// MaxTopK bounds k: the codes and a one-hot design's columns.
const MaxTopK = 1 << 20

func (topKMethod) Parse(args []string) (Encoding, error) {
	k, min, err := parseTopK(args)
	if err != nil {
		return nil, err
	}
	return &topKEnc{k: k, min: min}, nil
}

// parseTopK parses [K][:min=N] of topk and onehot.
func parseTopK(args []string) (k int, min uint64, err error) {
	k, min = 100, 1
	if err := noRepeats(args); err != nil {
		return 0, 0, err
	}
	for i, a := range args {
		switch {
		case i == 0 && a != "" && a[0] >= '0' && a[0] <= '9':
			v, err := parseUint("K", a, 1, MaxTopK)
			if err != nil {
				return 0, 0, err
			}
			k = int(v)
		case len(a) > 4 && a[:4] == "min=":
			v, err := parseUint("min", a[4:], 1, 1<<62)
			if err != nil {
				return 0, 0, err
			}
			min = v
		default:
			return 0, 0, fmt.Errorf("unknown parameter %q (want K, then min=N)", a)
		}
	}
	return k, min, nil
}

// topKString prints name:K[:min=N].
func topKString(name string, k int, min uint64) string {
	s := name + ":" + strconv.Itoa(k)
	if min != 1 {
		s += ":min=" + strconv.FormatUint(min, 10)
	}
	return s
}

type topKEnc struct {
	k   int
	min uint64
}

func (e *topKEnc) Method() Method                 { return topKMethod{} }
func (e *topKEnc) String() string                 { return topKString("topk", e.k, e.min) }
func (e *topKEnc) Needs() Needs                   { return Needs{} }
func (e *topKEnc) Validate(Pass) error            { return nil }
func (e *topKEnc) Check(colstats.Task, int) error { return nil }

func (e *topKEnc) Fit(c *Column) Fitted {
	return &topKFit{c: c, k: e.k, codes: c.St.TopK(e.k, e.min, c.Keep)}
}

func (e *topKEnc) Load(c *Column, raw json.RawMessage) (Fitted, error) {
	if err := strictjson.Decode(raw, &struct{}{}); err != nil {
		return nil, err
	}
	return &topKFit{c: c, k: e.k, codes: []int32{}}, nil
}

// topKFit holds the code of every level slot (0: other), for topk and
// onehot alike.
type topKFit struct {
	c     *Column
	k     int
	name  string // table column and output: "topk" unless set
	codes []int32
}

func (f *topKFit) column() string {
	if f.name != "" {
		return f.name
	}
	return "topk"
}

// code returns the code of slot l (-1: unseen).
func (f *topKFit) code(l int32) int64 {
	if l < 0 {
		return 0
	}
	return int64(f.codes[l])
}

func (f *topKFit) Outputs() []table.Field {
	return []table.Field{{Name: f.column(), Kind: table.Int64}}
}

func (f *topKFit) Encoder(Pass) Encoder { return f }

func (f *topKFit) Encode(r *Rows, dst []table.Column) {
	out := dst[0].ResetInts(r.N)
	for i, l := range r.Slots {
		out[i] = f.code(l)
	}
}

func (f *topKFit) TableColumns() []table.Field {
	return []table.Field{{Name: f.column(), Kind: table.Int64}}
}

func (f *topKFit) FillTable(lv *Levels, dst []table.Column) {
	out := dst[0].ResetInts(len(lv.Slots))
	for i, l := range lv.Slots {
		out[i] = int64(f.codes[l])
	}
}

func (f *topKFit) LoadTable(slots []int32, src []table.Column) error {
	for len(f.codes) < f.c.St.NumLevels() {
		f.codes = append(f.codes, 0)
	}
	for i, l := range slots {
		v := src[0].Ints[i]
		if v < 0 || v > int64(f.k) {
			return &LoadError{Row: i, Msg: fmt.Sprintf("%s %d: want 0 to k (%d)", f.column(), v, f.k)}
		}
		f.codes[l] = int32(v)
	}
	return nil
}

func (f *topKFit) Finish() error { return nil }
func (f *topKFit) Manifest() any { return nil }

func (e *topKEnc) Names() []string { return []string{"topk"} }

// Codes gives the codes 1..n, n the largest code given (levels below it
// in the ranking).
func (f *topKFit) Codes() (int, int64) {
	n := 0
	for _, c := range f.codes {
		n = max(n, int(c))
	}
	return n, 1
}
