package kern

import (
	"fmt"
	"math/rand/v2"
	"syscall"
	"testing"
	"time"
)

// cpuTime is the processor time the process has used (all threads). On a
// machine shared with other work, flops per processor-second measure a
// kernel's efficiency more steadily than flops per wall-clock second.
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// naiveGemm is the textbook loop for C = A·B (row-major, no transposes),
// the baseline the kernels are benchmarked beside.
func naiveGemm[T Float](m, n, k int, a, b, c []T) {
	for i := range m {
		for j := range n {
			var s T
			for l := range k {
				s += a[i*k+l] * b[l*n+j]
			}
			c[i*n+j] = s
		}
	}
}

// BenchmarkGemm measures C = A·Bᵀ (the forward product of a dense layer)
// on square sizes with every kernel this machine can run, and the naive
// loop beside them at the smaller sizes. GFLOP/s counts 2·n³ per product.
// Run with -cpu 1,2 for the single-core and parallel paths.
func BenchmarkGemm(b *testing.B) {
	for _, n := range []int{64, 128, 256, 512, 1024} {
		benchSize[float32](b, n)
		benchSize[float64](b, n)
	}
}

func benchSize[T Float](b *testing.B, n int) {
	rng := rand.New(rand.NewPCG(1, 1))
	x, y, c := make([]T, n*n), make([]T, n*n), make([]T, n*n)
	for i := range x {
		x[i], y[i] = T(rng.Float64()), T(rng.Float64())
	}
	flops := 2 * float64(n) * float64(n) * float64(n)
	for _, mk := range kernelsOf[T]() {
		if mk.name == "go" && n > 256 {
			continue
		}
		b.Run(fmt.Sprintf("size=%d/%s/%s", n, floatName[T](), kernelName(mk)), func(b *testing.B) {
			withKernel(mk, func() {
				Gemm(false, true, n, n, n, 1, x, n, y, n, 0, c, n)
				b.ReportAllocs()
				b.ResetTimer()
				t0 := cpuTime()
				for range b.N {
					Gemm(false, true, n, n, n, 1, x, n, y, n, 0, c, n)
				}
				cpu := cpuTime() - t0
				b.ReportMetric(flops*float64(b.N)/b.Elapsed().Seconds()/1e9, "GFLOP/s")
				b.ReportMetric(flops*float64(b.N)/cpu.Seconds()/1e9, "GFLOP/cpu-s")
			})
		})
	}
	if n <= 256 {
		b.Run(fmt.Sprintf("size=%d/%s/naive", n, floatName[T]()), func(b *testing.B) {
			for range b.N {
				naiveGemm(n, n, n, x, y, c)
			}
			b.ReportMetric(flops*float64(b.N)/b.Elapsed().Seconds()/1e9, "GFLOP/s")
		})
	}
}

// BenchmarkSmallStep runs the eight products of one SGD step of the
// network 16-32-32-4 at batch 32, with the transposes net.Dense uses
// (forward X·Wᵀ, weight gradient dYᵀ·X, input gradient dY·W): the
// overhead-bound case, where per-call costs and block padding, not
// arithmetic, set the time.
func BenchmarkSmallStep(b *testing.B) {
	b.Run("float=32", func(b *testing.B) { benchSmallStep[float32](b) })
	b.Run("float=64", func(b *testing.B) { benchSmallStep[float64](b) })
}

func benchSmallStep[T Float](b *testing.B) {
	type prod struct {
		tA, tB  bool
		m, n, k int
	}
	const batch = 32
	widths := []int{16, 32, 32, 4}
	var ps []prod
	for l := range 3 {
		in, out := widths[l], widths[l+1]
		ps = append(ps, prod{false, true, batch, out, in}, prod{true, false, out, in, batch})
		if l > 0 {
			ps = append(ps, prod{false, false, batch, in, out})
		}
	}
	rng := rand.New(rand.NewPCG(1, 1))
	buf := func(n int) []T {
		s := make([]T, n)
		for i := range s {
			s[i] = T(rng.Float64())
		}
		return s
	}
	a, bb, c := buf(32*32), buf(32*32), buf(32*32)
	run := func() {
		for _, p := range ps {
			lda, ldb := p.k, p.n
			if p.tA {
				lda = p.m
			}
			if p.tB {
				ldb = p.k
			}
			Gemm(p.tA, p.tB, p.m, p.n, p.k, 1, a, lda, bb, ldb, 0, c, p.n)
		}
	}
	run()
	b.ReportAllocs()
	b.ResetTimer()
	for range b.N {
		run()
	}
}
