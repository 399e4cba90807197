package method

import (
	"encoding/json"
	"fmt"
	"strconv"

	"manyfold/encoders/colstats"
	"manyfold/internal/strictjson"
	"manyfold/io/table"
)

// oneHotMethod writes indicators of the k most frequent levels,
// onehot[:K][:min=N] (default K 100): column <col>_onehot_<r> is 1 in the
// rows of the level of top-k code r and 0 elsewhere, so the "other" level
// (unseen, left out, or below the top k) is all zeros. The codes are
// topk's (same ranking, same min=N), and there are as many columns as
// codes were given: fewer than K when the column has fewer levels. For
// linear models, which need one weight per level rather than a code. The
// columns are integers of two values: Parquet stores them as a dictionary
// and runs of bit-packed indices, about a bit a value or less.
type oneHotMethod struct{}

func (oneHotMethod) Syntax() string { return "onehot[:K][:min=N]" }

func (oneHotMethod) Summary() string {
	return "indicators of the K most frequent levels (default 100), other = all zeros: <col>_onehot_1 ... <col>_onehot_K"
}

func (oneHotMethod) Name() string { return "onehot" }

func (oneHotMethod) Parse(args []string) (Encoding, error) {
	k, min, err := parseTopK(args)
	if err != nil {
		return nil, err
	}
	return &oneHotEnc{k: k, min: min}, nil
}

type oneHotEnc struct {
	k   int
	min uint64
}

func (e *oneHotEnc) Method() Method                 { return oneHotMethod{} }
func (e *oneHotEnc) String() string                 { return topKString("onehot", e.k, e.min) }
func (e *oneHotEnc) Needs() Needs                   { return Needs{} }
func (e *oneHotEnc) Names() []string                { return nil } // one per code, known after the fit
func (e *oneHotEnc) Validate(Pass) error            { return nil }
func (e *oneHotEnc) Check(colstats.Task, int) error { return nil }

func (e *oneHotEnc) Fit(c *Column) Fitted {
	codes := c.St.TopK(e.k, e.min, c.Keep)
	n := 0
	for _, v := range codes {
		n = max(n, int(v))
	}
	return &oneHotFit{topKFit: topKFit{c: c, k: e.k, name: "onehot", codes: codes}, n: n}
}

// oneHotManifest records how many codes the fit gave: the indicator
// columns.
type oneHotManifest struct {
	Codes int `json:"codes"`
}

func (e *oneHotEnc) Load(c *Column, raw json.RawMessage) (Fitted, error) {
	var om oneHotManifest
	if err := strictjson.Decode(raw, &om); err != nil {
		return nil, err
	}
	if om.Codes < 0 || om.Codes > e.k {
		return nil, fmt.Errorf("codes %d: want 0 to k (%d)", om.Codes, e.k)
	}
	return &oneHotFit{topKFit: topKFit{c: c, k: om.Codes, name: "onehot", codes: []int32{}}, n: om.Codes}, nil
}

// oneHotFit is the top-k codes of a column and the number of codes given.
type oneHotFit struct {
	topKFit
	n int
}

func (f *oneHotFit) Outputs() []table.Field {
	out := make([]table.Field, f.n)
	for r := range out {
		out[r] = table.Field{Name: "onehot_" + strconv.Itoa(r+1), Kind: table.Int64}
	}
	return out
}

func (f *oneHotFit) Encoder(Pass) Encoder { return f }

func (f *oneHotFit) Encode(r *Rows, dst []table.Column) {
	cols := make([][]int64, f.n)
	for j := range cols {
		cols[j] = dst[j].ResetInts(r.N)
		clear(cols[j])
	}
	for i, l := range r.Slots {
		if c := f.code(l); c > 0 {
			cols[c-1][i] = 1
		}
	}
}

func (f *oneHotFit) Manifest() any { return oneHotManifest{Codes: f.n} }

// Codes says that the indicators are quantities already (0 or 1): unlike
// topk's, the first output is not a code.
func (f *oneHotFit) Codes() (int, int64) { return 0, 0 }
