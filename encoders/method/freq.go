package method

import (
	"encoding/json"
	"fmt"
	"math"

	"manyfold/encoders/colstats"
	"manyfold/internal/strictjson"
	"manyfold/io/table"
)

// freqMethod is the frequency of a level: freq, the rows of the level in
// the fitting data, or freq:share, their share of all fitting rows. An
// unseen level, or one left out, gets 0. It does not read the target.
type freqMethod struct{}

func (freqMethod) Syntax() string { return "freq[:share]" }

func (freqMethod) Summary() string {
	return "rows of the level, or their share of all rows: <col>_freq"
}

func (freqMethod) Name() string { return "freq" }

func (freqMethod) Parse(args []string) (Encoding, error) {
	switch {
	case len(args) == 0:
		return &freqEnc{}, nil
	case len(args) == 1 && args[0] == "share":
		return &freqEnc{share: true}, nil
	}
	return nil, fmt.Errorf("want freq or freq:share")
}

type freqEnc struct{ share bool }

func (e *freqEnc) Method() Method { return freqMethod{} }

func (e *freqEnc) String() string {
	if e.share {
		return "freq:share"
	}
	return "freq"
}

func (e *freqEnc) Needs() Needs                   { return Needs{} }
func (e *freqEnc) Validate(Pass) error            { return nil }
func (e *freqEnc) Check(colstats.Task, int) error { return nil }
func (e *freqEnc) Fit(c *Column) Fitted           { return &freqFit{e: e, c: c} }
func (e *freqEnc) Load(c *Column, raw json.RawMessage) (Fitted, error) {
	if err := strictjson.Decode(raw, &struct{}{}); err != nil {
		return nil, err
	}
	return &freqFit{e: e, c: c, stored: []float64{}}, nil
}

// freqFit computes a level's frequency from its row count; a column loaded
// from a mapping table holds the stored frequencies (stored[slot]).
type freqFit struct {
	e      *freqEnc
	c      *Column
	stored []float64
}

func (f *freqFit) Outputs() []table.Field {
	if f.e.share {
		return []table.Field{{Name: "freq", Kind: table.Float64}}
	}
	return []table.Field{{Name: "freq", Kind: table.Int64}}
}

// of returns the frequency of a level with rows rows.
func (f *freqFit) of(rows uint64) float64 {
	if f.e.share {
		return float64(rows) / f.c.Total
	}
	return float64(rows)
}

func (f *freqFit) Encoder(Pass) Encoder { return f }

func (f *freqFit) Encode(r *Rows, dst []table.Column) {
	var rows []uint64
	if f.stored == nil {
		rows = r.LevelRows(f.c)
	}
	value := func(i int) float64 {
		if rows != nil {
			return f.of(rows[i])
		}
		if l := r.Slots[i]; l >= 0 {
			return f.stored[l]
		}
		return 0
	}
	if f.e.share {
		out := dst[0].ResetFloats(r.N)
		for i := range out {
			out[i] = value(i)
		}
		return
	}
	out := dst[0].ResetInts(r.N)
	for i := range out {
		out[i] = int64(value(i))
	}
}

func (f *freqFit) TableColumns() []table.Field {
	return []table.Field{{Name: "freq", Kind: table.Float64}}
}

func (f *freqFit) FillTable(lv *Levels, dst []table.Column) {
	out := dst[0].ResetFloats(len(lv.Slots))
	for i, l := range lv.Slots {
		switch {
		case f.stored != nil:
			out[i] = f.stored[l]
		case i == 0 && lv.Unkept0:
			out[i] = 0
		default:
			out[i] = f.of(uint64(lv.Rows[i]))
		}
	}
}

func (f *freqFit) LoadTable(slots []int32, src []table.Column) error {
	for len(f.stored) < f.c.St.NumLevels() {
		f.stored = append(f.stored, 0)
	}
	for i, l := range slots {
		v := src[0].Floats[i]
		if !(v >= 0) || math.IsInf(v, 0) {
			return &LoadError{Row: i, Msg: fmt.Sprintf("freq %g: want a finite number >= 0", v)}
		}
		f.stored[l] = v
	}
	return nil
}

func (f *freqFit) Finish() error { return nil }
func (f *freqFit) Manifest() any { return nil }

func (e *freqEnc) Names() []string { return []string{"freq"} }
