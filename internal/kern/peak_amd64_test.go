//go:build !noasm

package kern

import "testing"

// BenchmarkPeak is the processor's peak float64 rate on one core: a loop
// of independent FMAs on registers only (2 flops per lane). float32 peaks
// at twice these figures. The kernels' GFLOP/s in BenchmarkGemm, measured
// in the same run, are read as fractions of it.
func BenchmarkPeak(b *testing.B) {
	const n = 1 << 20
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
			for range b.N {
				c.f(n)
			}
			b.ReportMetric(float64(b.N)*n*12*float64(c.lanes)*2/b.Elapsed().Seconds()/1e9, "GFLOP/s-f64")
		})
	}
}
