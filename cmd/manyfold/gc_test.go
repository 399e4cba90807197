package main

import "testing"

// TestGCPercentFor checks the collector's target against its rule: the
// heap may grow by 64 MiB or by 15% of the live heap, whichever is more,
// and never by more than the live heap (GOGC 100).
func TestGCPercentFor(t *testing.T) {
	for _, tc := range []struct {
		live uint64
		want int
	}{
		{0, 100},
		{1 << 20, 100},
		{64 << 20, 100},
		{128 << 20, 50},
		{256 << 20, 25},
		{400 << 20, 16},
		{427 << 20, 15},
		{4 << 30, 15},
	} {
		if got := gcPercentFor(tc.live); got != tc.want {
			t.Errorf("live heap %d MiB: GOGC %d, want %d", tc.live>>20, got, tc.want)
		}
	}
}
