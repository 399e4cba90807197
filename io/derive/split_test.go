package derive

import "testing"

// TestSplitCondition: a condition splits at its first operator, the
// two-character ones before the one-character ones, sides trimmed; a name
// without an operator or with an empty side is no condition.
func TestSplitCondition(t *testing.T) {
	for _, tc := range []struct {
		name, col, op, val string
		ok                 bool
	}{
		{"delay>15", "delay", ">", "15", true},
		{" delay >= 15 ", "delay", ">=", "15", true},
		{"carrier!=AA", "carrier", "!=", "AA", true},
		{"x<=-1.5", "x", "<=", "-1.5", true},
		{"status=on time", "status", "=", "on time", true},
		{"delay", "", "", "", false},
		{"delay>", "delay", ">", "", false},
		{">15", "", ">", "15", false},
	} {
		col, op, val, ok := SplitCondition(tc.name)
		if ok != tc.ok || (ok && (col != tc.col || op != tc.op || val != tc.val)) {
			t.Errorf("SplitCondition(%q) = %q %q %q %v, want %q %q %q %v", tc.name, col, op, val, ok, tc.col, tc.op, tc.val, tc.ok)
		}
	}
}
