package compare

import (
	"fmt"
	"strconv"
	"strings"

	"manyfold/encoders/colstats"
	"manyfold/encoders/method"
	"manyfold/encoders/pipeline"
)

// Kind is the encoding method of a candidate.
type Kind uint8

// The kinds of candidate.
const (
	KindPrior    Kind = iota // baseline: no information from the column
	KindInSample             // baseline: raw level mean fitted on the training rows themselves (leaky)
	KindTarget               // smoothed target mean, out of fold
	KindFreq                 // frequency count
	KindTopK                 // top-k codes as indicators
	KindHash                 // hashed buckets as indicators
)

// Candidate is one encoder with its parameters.
type Candidate struct {
	Name        string             // canonical name, e.g. target:m=50, topk:100
	Kind        Kind               //
	Smoothing   colstats.Smoothing // KindTarget
	PriorPrefix int                // KindTarget: >0 pulls a level towards the mean of its first PriorPrefix bytes
	K           int                // KindTopK: levels with a code
	Buckets     uint64             // KindHash: number of buckets (XXH64 with seed 0, as encode's default)
}

// Baseline reports whether the candidate is a baseline (never the winner).
func (c Candidate) Baseline() bool { return c.Kind == KindPrior || c.Kind == KindInSample }

// DefaultCandidates is the default list: each method once, plus the two
// baselines.
const DefaultCandidates = "prior,target:insample,target:eb,freq,topk:100,hash:1024"

// ParseCandidates parses a comma-separated list of candidates. A comma
// inside target:blend=K,F belongs to the blend. Names must be distinct.
func ParseCandidates(list string) ([]Candidate, error) {
	var parts []string
	for _, p := range strings.Split(list, ",") {
		p = strings.TrimSpace(p)
		if n := len(parts); n > 0 && strings.Contains(parts[n-1], "blend=") && !strings.Contains(parts[n-1][strings.LastIndex(parts[n-1], "blend="):], ",") {
			if _, err := strconv.ParseFloat(p, 64); err == nil {
				parts[n-1] += "," + p
				continue
			}
			if f, _, ok := strings.Cut(p, ":"); ok {
				if _, err := strconv.ParseFloat(f, 64); err == nil { // blend=K,F:prior=prefixN
					parts[n-1] += "," + p
					continue
				}
			}
		}
		if p != "" {
			parts = append(parts, p)
		}
	}
	if len(parts) == 0 {
		return nil, &pipeline.UsageError{Msg: "--candidates: empty list"}
	}
	var out []Candidate
	seen := map[string]bool{}
	for _, p := range parts {
		c, err := ParseCandidate(p)
		if err != nil {
			return nil, err
		}
		if seen[c.Name] {
			return nil, &pipeline.UsageError{Msg: fmt.Sprintf("--candidates: %s is listed twice", c.Name)}
		}
		seen[c.Name] = true
		out = append(out, c)
	}
	return out, nil
}

// ParseCandidate parses one candidate: prior; target:insample;
// target[:eb|:m=NUM|:blend=K,F][:prior=prefixN]; freq; topk[:K] (K
// default 100); hash[:BUCKETS] (default 1024).
func ParseCandidate(s string) (Candidate, error) {
	bad := func(format string, a ...any) (Candidate, error) {
		return Candidate{}, &pipeline.UsageError{Msg: fmt.Sprintf("candidate %q: ", s) + fmt.Sprintf(format, a...)}
	}
	fields := strings.Split(s, ":")
	switch fields[0] {
	case "prior":
		if len(fields) > 1 {
			return bad("prior takes no parameters")
		}
		return Candidate{Name: "prior", Kind: KindPrior}, nil
	case "freq":
		if len(fields) > 1 {
			return bad("freq takes no parameters")
		}
		return Candidate{Name: "freq", Kind: KindFreq}, nil
	case "topk", "hash":
		n := uint64(100)
		if fields[0] == "hash" {
			n = 1024
		}
		if len(fields) > 2 {
			return bad("want %s or %s:N", fields[0], fields[0])
		}
		if len(fields) == 2 {
			v, err := strconv.ParseUint(fields[1], 10, 32)
			if err != nil || v < 1 || v > 1<<20 {
				return bad("%s:N needs a whole number N from 1 to %d", fields[0], 1<<20)
			}
			n = v
		}
		if fields[0] == "topk" {
			return Candidate{Name: "topk:" + strconv.FormatUint(n, 10), Kind: KindTopK, K: int(n)}, nil
		}
		return Candidate{Name: "hash:" + strconv.FormatUint(n, 10), Kind: KindHash, Buckets: n}, nil
	case "target":
		c := Candidate{Kind: KindTarget, Smoothing: colstats.Smoothing{Kind: "auto"}}
		sm := "eb"
		for _, f := range fields[1:] {
			switch {
			case f == "insample":
				if len(fields) != 2 {
					return bad("target:insample takes no other parameters")
				}
				return Candidate{Name: "target:insample", Kind: KindInSample, Smoothing: colstats.Smoothing{Kind: "m", M: 0}}, nil
			case f == "eb" || strings.HasPrefix(f, "m=") || strings.HasPrefix(f, "blend="):
				v, err := method.ParseSmoothing(f)
				if err != nil {
					return bad("%v", strings.TrimPrefix(err.Error(), "--smoothing "))
				}
				c.Smoothing, sm = v, f
			case strings.HasPrefix(f, "prior=prefix"):
				n, err := strconv.Atoi(strings.TrimPrefix(f, "prior=prefix"))
				if err != nil || n < 1 {
					return bad("prior=prefixN needs N >= 1")
				}
				c.PriorPrefix = n
			default:
				return bad("unknown parameter %q (want eb, m=NUM, blend=K,F, prior=prefixN or insample)", f)
			}
		}
		c.Name = "target:" + sm
		if c.PriorPrefix > 0 {
			c.Name += ":prior=prefix" + strconv.Itoa(c.PriorPrefix)
		}
		return c, nil
	}
	return bad("unknown encoder %q (want prior, target, freq, topk, hash)", fields[0])
}
