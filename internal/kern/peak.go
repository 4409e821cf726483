package kern

import (
	"sync"
	"time"
)

// Peak measures the machine's peak float64 rate, in GFLOP/s, on procs
// goroutines at once for about d: each runs a loop of independent vector
// FMAs on registers only (two flops per lane), the widest the processor
// has. float32 peaks at twice the float64 rate (twice the lanes per
// vector; common practice, no source). It returns 0 and "" where no such
// loop exists (the noasm build, or another architecture), and otherwise
// the instruction set measured ("avx512" or "avx2").
//
// Benchmarks measure it in the same run as the figures they read against
// it: the rate of the same processor changes with its load, its clock and
// with how it runs 512-bit instructions (some at half rate).
func Peak(procs int, d time.Duration) (gflops float64, isa string) {
	loop, lanes, isa := peakLoop()
	if loop == nil || procs < 1 {
		return 0, ""
	}
	return peakRate(loop, lanes, procs, d), isa
}

// peakRate runs loop (n·12 FMAs of lanes float64 lanes per call) on procs
// goroutines for about d and returns the float64 GFLOP/s.
func peakRate(loop func(int), lanes, procs int, d time.Duration) float64 {
	// One call is n·12 FMAs: about 0.1–1 ms, short beside d and long
	// beside the cost of a call.
	const n = 1 << 16
	loop(n) // warm up: the wide units may need a moment to power up
	var wg sync.WaitGroup
	calls := make([]int, procs)
	start := time.Now()
	for g := range procs {
		wg.Go(func() {
			for time.Since(start) < d {
				loop(n)
				calls[g]++
			}
		})
	}
	wg.Wait()
	elapsed := time.Since(start).Seconds()
	total := 0
	for _, c := range calls {
		total += c
	}
	return float64(total) * n * 12 * float64(lanes) * 2 / elapsed / 1e9
}
