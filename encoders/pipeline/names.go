package pipeline

import (
	"sort"
	"strconv"
	"strings"
)

// Closest returns up to n of the names nearest to name by edit distance
// (case-insensitive), nearest first, ties in the order given. Names further
// than half the length of name plus two edits are left out.
func Closest(name string, names []string, n int) []string {
	type cand struct {
		s string
		d int
		i int
	}
	var cs []cand
	limit := len(name)/2 + 2
	for i, s := range names {
		d := editDistance(strings.ToLower(name), strings.ToLower(s))
		if d <= limit {
			cs = append(cs, cand{s, d, i})
		}
	}
	sort.Slice(cs, func(a, b int) bool {
		if cs[a].d != cs[b].d {
			return cs[a].d < cs[b].d
		}
		return cs[a].i < cs[b].i
	})
	var out []string
	for i := 0; i < len(cs) && i < n; i++ {
		out = append(out, cs[i].s)
	}
	return out
}

// editDistance is the Levenshtein distance between a and b in bytes.
func editDistance(a, b string) int {
	prev := make([]int, len(b)+1)
	cur := make([]int, len(b)+1)
	for j := range prev {
		prev[j] = j
	}
	for i := 1; i <= len(a); i++ {
		cur[0] = i
		for j := 1; j <= len(b); j++ {
			cost := 1
			if a[i-1] == b[j-1] {
				cost = 0
			}
			cur[j] = min(prev[j]+1, cur[j-1]+1, prev[j-1]+cost)
		}
		prev, cur = cur, prev
	}
	return prev[len(b)]
}

func joinQuoted(names []string) string {
	q := make([]string, len(names))
	for i, s := range names {
		q[i] = strconv.Quote(s)
	}
	return strings.Join(q, ", ")
}
