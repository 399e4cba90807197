package method

import (
	"encoding/json"
	"fmt"
	"math"
	"strconv"
	"strings"

	"manyfold/encoders/colstats"
	"manyfold/encoders/hashenc"
	"manyfold/internal/strictjson"
	"manyfold/io/table"
)

// hashMethod is feature hashing: hash[:B][:signed][:seed=S] puts a value in
// bucket XXH64(value, S) mod B (default B 1024, S 0; hashenc), and with
// signed adds a column of signs from the hash's top bit (Weinberger et
// al., ICML 2009). It reads the values themselves, so an unseen level gets
// its bucket too; the null level hashes the empty value.
type hashMethod struct{}

func (hashMethod) Syntax() string { return "hash[:B][:signed][:seed=S]" }

func (hashMethod) Summary() string {
	return "bucket of XXH64(value) mod B (default 1024): <col>_hash, and <col>_hash_sign with signed"
}

func (hashMethod) Name() string { return "hash" }

// MaxBuckets bounds B: bucket numbers are written as 64-bit signed
// integers.
const MaxBuckets = 1<<63 - 1

func (hashMethod) Parse(args []string) (Encoding, error) {
	e := &hashEnc{buckets: 1024}
	if err := noRepeats(args); err != nil {
		return nil, err
	}
	for i, a := range args {
		switch {
		case i == 0 && a != "" && a[0] >= '0' && a[0] <= '9':
			v, err := parseUint("B", a, 1, MaxBuckets)
			if err != nil {
				return nil, err
			}
			e.buckets = v
		case a == "signed":
			e.signed = true
		case strings.HasPrefix(a, "seed="):
			v, err := strconv.ParseUint(a[5:], 10, 64)
			if err != nil {
				return nil, fmt.Errorf("seed %q: want a whole number from 0 to %d", a[5:], uint64(math.MaxUint64))
			}
			e.seed = v
		default:
			return nil, fmt.Errorf("unknown parameter %q (want B, signed, seed=S)", a)
		}
	}
	return e, nil
}

type hashEnc struct {
	buckets, seed uint64
	signed        bool
}

func (e *hashEnc) Method() Method { return hashMethod{} }

func (e *hashEnc) String() string {
	s := "hash:" + strconv.FormatUint(e.buckets, 10)
	if e.signed {
		s += ":signed"
	}
	if e.seed != 0 {
		s += ":seed=" + strconv.FormatUint(e.seed, 10)
	}
	return s
}

func (e *hashEnc) Needs() Needs                   { return Needs{Values: true} }
func (e *hashEnc) Validate(Pass) error            { return nil }
func (e *hashEnc) Check(colstats.Task, int) error { return nil }
func (e *hashEnc) Fit(c *Column) Fitted           { return &hashFit{e: e, c: c} }

func (e *hashEnc) Load(c *Column, raw json.RawMessage) (Fitted, error) {
	var hm hashManifest
	if err := strictjson.Decode(raw, &hm); err != nil {
		return nil, err
	}
	if !(hm.Occupied >= 0) || !(hm.Shared >= 0 && hm.Shared <= 1) {
		return nil, fmt.Errorf("expected_occupied %g, expected_shared %g: want a count and a share", hm.Occupied, hm.Shared)
	}
	return &hashFit{e: e, c: c}, nil
}

type hashFit struct {
	e *hashEnc
	c *Column
}

// bucket returns the bucket of a value's hash.
func (f *hashFit) bucket(v []byte) uint64 {
	return hashenc.Bucket(hashenc.Sum(v, f.e.seed), f.e.buckets)
}

func (f *hashFit) Outputs() []table.Field {
	out := []table.Field{{Name: "hash", Kind: table.Int64}}
	if f.e.signed {
		out = append(out, table.Field{Name: "hash_sign", Kind: table.Int64})
	}
	return out
}

func (f *hashFit) Encoder(Pass) Encoder { return f }

func (f *hashFit) Encode(r *Rows, dst []table.Column) {
	src := r.Values
	bucket := dst[0].ResetInts(r.N)
	var sign []int64
	if f.e.signed {
		sign = dst[1].ResetInts(r.N)
	}
	var scratch []byte
	for i := 0; i < r.N; i++ {
		var v []byte
		if src.Form == table.FormText || src.Form == table.FormDict {
			v = src.Bytes(i)
		} else {
			scratch = src.AppendText(scratch[:0], i)
			v = scratch
		}
		h := hashenc.Sum(v, f.e.seed)
		bucket[i] = int64(hashenc.Bucket(h, f.e.buckets))
		if sign != nil {
			sign[i] = int64(hashenc.Sign(h))
		}
	}
}

func (f *hashFit) TableColumns() []table.Field {
	return []table.Field{{Name: "bucket", Kind: table.Int64}}
}

func (f *hashFit) FillTable(lv *Levels, dst []table.Column) {
	out := dst[0].ResetInts(len(lv.Slots))
	for i := range lv.Slots {
		out[i] = int64(f.bucket(lv.Bytes(i)))
	}
}

func (f *hashFit) LoadTable(slots []int32, src []table.Column) error {
	for i, l := range slots {
		v := src[0].Ints[i]
		var level []byte
		if l > 0 {
			level = f.c.St.Bytes(int(l))
		}
		if want := f.bucket(level); v < 0 || uint64(v) != want {
			return &LoadError{Row: i, Msg: fmt.Sprintf("bucket %d, but the encoding's buckets and seed give %d", v, want)}
		}
	}
	return nil
}

func (f *hashFit) Finish() error { return nil }

// hashManifest records, for the levels the fit saw, the expected number
// of occupied buckets B*(1-(1-1/B)^n) and the chance that a level shares
// its bucket 1-(1-1/B)^(n-1) (standard occupancy results; hashenc).
type hashManifest struct {
	Occupied float64 `json:"expected_occupied"`
	Shared   float64 `json:"expected_shared"`
}

func (f *hashFit) Manifest() any {
	n, b := float64(f.c.Distinct), float64(f.e.buckets)
	return hashManifest{Occupied: hashenc.ExpectedOccupied(n, b), Shared: hashenc.SharedChance(n, b)}
}

func (e *hashEnc) Names() []string {
	if e.signed {
		return []string{"hash", "hash_sign"}
	}
	return []string{"hash"}
}

// Codes gives the buckets 0..B-1.
func (f *hashFit) Codes() (int, int64) { return int(f.e.buckets), 0 }

// sharedWarn is the expected share of levels sharing their bucket past
// which a hash is reported as having far too few buckets.
const sharedWarn = 0.5

// Warnings reports a hash whose levels mostly share a bucket: the chance
// that a level shares its bucket, 1-(1-1/B)^(n-1), above sharedWarn.
func (f *hashFit) Warnings() []string {
	n, b := float64(f.c.Distinct), float64(f.e.buckets)
	if p := hashenc.SharedChance(n, b); p > sharedWarn {
		return []string{fmt.Sprintf("%s: %d levels in %d buckets, a level shares its bucket with probability %.2f; give more buckets", f.e, f.c.Distinct, f.e.buckets, p)}
	}
	return nil
}
