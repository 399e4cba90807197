package main

import "testing"

// TestStartedBy: finish removes the staging folder of its own run and of
// runs that started before it, never one of a run started after it nor a
// folder whose name is not a run's.
func TestStartedBy(t *testing.T) {
	const run = "18ee5784dd50ec2c-1a78e60d46f6877d"
	for _, c := range []struct {
		dir  string
		want bool
	}{
		{"_stats-" + run, true},
		{"_stats-18ee5784dd50ec2b-ffff", true},  // a nanosecond earlier
		{"_stats-18ee5784dd50ec2d-0000", false}, // a nanosecond later
		{"_stats-18ee5784dd50ec2c-0000", false}, // the same start, another run
		{"_stats-notarun", false},
		{"_other-18ee5784dd50ec2b-ffff", false},
	} {
		if got := startedBy(c.dir, run); got != c.want {
			t.Errorf("startedBy(%q) = %v, want %v", c.dir, got, c.want)
		}
	}
}
