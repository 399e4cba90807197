package pipeline

import "strings"

// EditDistance is the Levenshtein distance between a and b in bytes,
// ignoring case, as Closest measures it: for a caller that wants a closer
// match than Closest's bound (a command's name, where a far suggestion
// would mislead).
func EditDistance(a, b string) int {
	return editDistance(strings.ToLower(a), strings.ToLower(b))
}
