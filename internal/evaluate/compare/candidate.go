package compare

import (
	"slices"
	"strings"

	"manyfold/encoders/method"
)

// Baseline names a candidate that is not an encoding to choose but a
// point of comparison.
type Baseline uint8

// The baselines.
const (
	NotBaseline Baseline = iota
	PriorBaseline
	InSampleBaseline // the raw level mean fitted on the training rows themselves (leaky)
)

// Candidate is one encoding, or several encodings of the column fed to
// one model together (target:eb+freq), or a baseline.
type Candidate struct {
	Name      string            // canonical name: the encodings' grammar, prior or target:insample
	Baseline  Baseline          //
	Encodings []method.Encoding // in the grammar of encode (encoders/method)
}

// IsBaseline reports whether the candidate is a baseline (never the
// winner).
func (c Candidate) IsBaseline() bool { return c.Baseline != NotBaseline }

// DefaultCandidates is the default list: the two baselines, the target
// mean, frequency, top-k codes and hash buckets each alone, and the target
// mean with the frequency together, which scan suggests for most columns.
const DefaultCandidates = "prior,target:insample,target:eb,target:eb+freq,freq,topk:100,hash:1024"

// ParseCandidates parses a comma-separated list of candidates, each a
// baseline (prior, target:insample) or a list of encodings joined by '+'
// in encode's grammar. A comma inside target:blend=K,F belongs to the
// blend. Names must be distinct.
func ParseCandidates(list string) ([]Candidate, error) {
	parts := method.SplitCandidates(list)
	if len(parts) == 0 {
		return nil, usage("%s: empty list", ParamCandidates)
	}
	var out []Candidate
	seen := map[string]bool{}
	for _, p := range parts {
		c, err := ParseCandidate(p)
		if err != nil {
			return nil, err
		}
		if seen[c.Name] {
			return nil, usage("%s: %s is listed twice", ParamCandidates, c.Name)
		}
		seen[c.Name] = true
		out = append(out, c)
	}
	return out, nil
}

// withPrior returns cands with the prior baseline appended when the list
// lacks it: the verdict measures every gain against the prior, so without
// it no column could have a winner.
func withPrior(cands []Candidate) []Candidate {
	for _, c := range cands {
		if c.Baseline == PriorBaseline {
			return cands
		}
	}
	return append(slices.Clip(cands), Candidate{Name: "prior", Baseline: PriorBaseline})
}

// ParseCandidate parses one candidate: prior, target:insample, or
// encodings joined by '+' (target:eb, target:m=20:prior=prefix3,
// target:eb+freq, topk:100, hash:1024, woe, onehot:20, ...).
func ParseCandidate(s string) (Candidate, error) {
	s = strings.TrimSpace(s)
	switch s {
	case "prior":
		return Candidate{Name: "prior", Baseline: PriorBaseline}, nil
	case "target:insample":
		m0, _ := method.Parse("target:m=0")
		return Candidate{Name: s, Baseline: InSampleBaseline, Encodings: []method.Encoding{m0}}, nil
	}
	encs, err := method.ParseList(s)
	if err != nil {
		return Candidate{}, usage("candidate %q: %v", s, err)
	}
	for _, e := range encs {
		if p := e.Needs().Prior; p.Column != "" {
			return Candidate{}, usage("candidate %q: compare takes prior=prefixN, not a column prior", s)
		}
	}
	return Candidate{Name: method.ListString(encs), Encodings: encs}, nil
}
