package bench

import (
	"runtime"
	"sync"
	"testing"
	"time"

	"github.com/rhomb/rhomb/internal/kern"
	"github.com/rhomb/rhomb/net"
)

// peaks caches the machine's peak float64 rate per GOMAXPROCS, measured
// once per run (the best of five 60 ms runs of kern.Peak, as
// BenchmarkPeak takes the best of its runs: on a shared host one run can
// lose a core to a neighbour, and a low peak would inflate every of-peak
// figure of the run; one such run gave 0.84 of peak for a product that
// ran at 0.68 of BenchmarkPeak's figure), so that every GFLOP/s figure of
// the run can also be given as a fraction of the peak of the same run.
var peaks struct {
	sync.Mutex
	rate map[int]float64
}

// peakOf returns the peak rate for T on GOMAXPROCS goroutines, in
// GFLOP/s, or 0 where the build has no loop to measure it with.
func peakOf[T net.Float]() float64 {
	procs := runtime.GOMAXPROCS(0)
	peaks.Lock()
	defer peaks.Unlock()
	if peaks.rate == nil {
		peaks.rate = map[int]float64{}
	}
	r, ok := peaks.rate[procs]
	if !ok {
		for range 5 {
			p, _ := kern.Peak(procs, 60*time.Millisecond)
			r = max(r, p)
		}
		peaks.rate[procs] = r
	}
	var z T
	if _, f32 := any(z).(float32); f32 {
		return 2 * r
	}
	return r
}

// BenchmarkPeak reports the peak rate the other benchmarks' "of-peak"
// figures divide by: float64 and float32, on GOMAXPROCS goroutines (run
// with -cpu 1,2 for both), measured afresh.
func BenchmarkPeak(b *testing.B) {
	var best float64
	var isa string
	for range b.N {
		r, name := kern.Peak(runtime.GOMAXPROCS(0), 100*time.Millisecond)
		best, isa = max(best, r), name
	}
	if isa == "" {
		b.Skip("no register-only FMA loop in this build")
	}
	b.ReportMetric(best, "GFLOP/s-f64")
	b.ReportMetric(2*best, "GFLOP/s-f32")
	b.Logf("instruction set %s", isa)
}
