//go:build !noasm

package kern

import (
	"runtime"
	"testing"
	"time"
)

// BenchmarkPeak is the peak float64 rate of each vector instruction set on
// GOMAXPROCS goroutines (float32 peaks at twice these figures): a loop of
// independent FMAs on registers only (peakRate, the loop Peak measures
// with). Comparing the two tells a processor that runs 512-bit FMAs at
// full rate from one that runs them as two 256-bit halves. The kernels'
// GFLOP/s in BenchmarkGemm, measured in the same run, are read as
// fractions of it; package bench reports that fraction itself.
func BenchmarkPeak(b *testing.B) {
	for _, c := range []struct {
		name  string
		ok    bool
		lanes int
		f     func(int)
	}{{"avx2", hasAVX2(), 4, peakAVX2}, {"avx512", hasAVX512(), 8, peakAVX512}} {
		if !c.ok {
			continue
		}
		b.Run("isa="+c.name, func(b *testing.B) {
			var best float64
			for range b.N {
				best = max(best, peakRate(c.f, c.lanes, runtime.GOMAXPROCS(0), 50*time.Millisecond))
			}
			b.ReportMetric(best, "GFLOP/s-f64")
		})
	}
}
