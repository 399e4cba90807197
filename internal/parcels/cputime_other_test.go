//go:build !unix

package parcels

// cpuSeconds is not available here; the benchmark then omits rows/cpu-s.
func cpuSeconds() float64 { return 0 }
