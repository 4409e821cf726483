package kern

import (
	"fmt"
	"runtime"
	"testing"
	"time"
)

// TestPeak: where the processor has a register-only FMA loop, Peak measures
// a positive rate and names it; where it has none (the noasm build),
// Peak says so with 0 and no name rather than a made-up figure.
func TestPeak(t *testing.T) {
	loop, _, isa := peakLoop()
	got, gotISA := Peak(1, 20*time.Millisecond)
	if loop == nil {
		if got != 0 || gotISA != "" {
			t.Errorf("no loop, yet Peak = %v, %q", got, gotISA)
		}
		return
	}
	if !(got > 0) || gotISA != isa {
		t.Errorf("Peak = %v GFLOP/s, %q; want a positive rate of %q", got, gotISA, isa)
	}
	if z, _ := Peak(0, time.Millisecond); z != 0 {
		t.Errorf("Peak on 0 goroutines = %v, want 0", z)
	}
}

// BenchmarkPeak is the processor's peak rate on one goroutine and on
// GOMAXPROCS goroutines (Peak), float64 and float32 (twice float64). The
// kernels' GFLOP/s in BenchmarkGemm and in package bench are read as
// fractions of it, measured in the same run.
func BenchmarkPeak(b *testing.B) {
	if loop, _, _ := peakLoop(); loop == nil {
		b.Skip("no register-only FMA loop in this build")
	}
	for _, procs := range []int{1, runtime.GOMAXPROCS(0)} {
		b.Run(fmt.Sprintf("goroutines=%d", procs), func(b *testing.B) {
			var best float64
			var isa string
			for range b.N {
				g, name := Peak(procs, 50*time.Millisecond)
				best, isa = max(best, g), name
			}
			b.ReportMetric(best, "GFLOP/s-f64")
			b.ReportMetric(2*best, "GFLOP/s-f32")
			b.Logf("isa %s", isa)
		})
	}
}
