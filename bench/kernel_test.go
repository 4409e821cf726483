package bench

import (
	"fmt"
	"math/rand/v2"
	"syscall"
	"testing"
	"time"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/gonum"

	"github.com/rhomb/rhomb/internal/kern"
	"github.com/rhomb/rhomb/net"
)

// cpuTime is the processor time used by the process, all threads. On a
// machine shared with other work, work per processor-second (the
// "/cpu-s" metrics) is steadier than work per wall-clock second; read the
// two side by side. It does not show a parallel speed-up, which only
// wall-clock time can.
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// gemmFunc is one matrix product C = op(A)·op(B) (alpha 1, beta 0) on
// row-major data, by rhomb or by gonum.
type gemmFunc[T net.Float] func(tA, tB bool, m, n, k int, a []T, lda int, b []T, ldb int, c []T, ldc int)

func rhombGemm[T net.Float](tA, tB bool, m, n, k int, a []T, lda int, b []T, ldb int, c []T, ldc int) {
	kern.Gemm(tA, tB, m, n, k, 1, a, lda, b, ldb, 0, c, ldc)
}

func trans(t bool) blas.Transpose {
	if t {
		return blas.Trans
	}
	return blas.NoTrans
}

// gonumGemm is gonum's Dgemm or Sgemm (blas/gonum, its pure-Go BLAS; it
// parallelizes large products itself).
func gonumGemm[T net.Float](tA, tB bool, m, n, k int, a []T, lda int, b []T, ldb int, c []T, ldc int) {
	var g gonum.Implementation
	switch a := any(a).(type) {
	case []float64:
		g.Dgemm(trans(tA), trans(tB), m, n, k, 1, a, lda, any(b).([]float64), ldb, 0, any(c).([]float64), ldc)
	case []float32:
		g.Sgemm(trans(tA), trans(tB), m, n, k, 1, a, lda, any(b).([]float32), ldb, 0, any(c).([]float32), ldc)
	}
}

func impls[T net.Float]() []struct {
	name string
	f    gemmFunc[T]
} {
	return []struct {
		name string
		f    gemmFunc[T]
	}{{"rhomb", rhombGemm[T]}, {"gonum", gonumGemm[T]}}
}

func randomSlice[T net.Float](rng *rand.Rand, n int) []T {
	v := make([]T, n)
	for i := range v {
		v[i] = T(rng.Float64() - 0.5)
	}
	return v
}

// reportFlops reports GFLOP/s per wall-clock and per processor second for
// flops floating-point operations of type T per benchmark operation, and
// the wall-clock rate as a fraction of the machine's peak for T on
// GOMAXPROCS cores measured in the same run ("of-peak"; not reported
// where the build cannot measure a peak).
func reportFlops[T net.Float](b *testing.B, flops float64, cpu time.Duration) {
	rate := flops * float64(b.N) / b.Elapsed().Seconds() / 1e9
	b.ReportMetric(rate, "GFLOP/s")
	if cpu > 0 {
		b.ReportMetric(flops*float64(b.N)/cpu.Seconds()/1e9, "GFLOP/cpu-s")
	}
	if p := peakOf[T](); p > 0 {
		b.ReportMetric(rate/p, "of-peak")
	}
}

// BenchmarkGemmSquare is C = A·Bᵀ (a dense layer's forward product) on
// square sizes 64 to 1024, rhomb's kernel and gonum's side by side.
// GFLOP/s counts 2n³ per product. Run with -cpu 1,2 for GOMAXPROCS 1
// against 2.
func BenchmarkGemmSquare(b *testing.B) {
	for _, n := range []int{64, 128, 256, 512, 1024} {
		benchSquare[float32](b, n)
		benchSquare[float64](b, n)
	}
}

func benchSquare[T net.Float](b *testing.B, n int) {
	rng := rand.New(rand.NewPCG(1, 1))
	x, y, c := randomSlice[T](rng, n*n), randomSlice[T](rng, n*n), make([]T, n*n)
	for _, im := range impls[T]() {
		b.Run(fmt.Sprintf("size=%d/%s/impl=%s", n, floatName[T](), im.name), func(b *testing.B) {
			im.f(false, true, n, n, n, x, n, y, n, c, n)
			b.ResetTimer()
			t0 := cpuTime()
			for range b.N {
				im.f(false, true, n, n, n, x, n, y, n, c, n)
			}
			reportFlops[T](b, 2*float64(n)*float64(n)*float64(n), cpuTime()-t0)
		})
	}
}

// product is one of the eight matrix products of a training step, with
// the operand shapes and transpositions the layers use.
type product struct {
	name    string
	tA, tB  bool
	m, n, k int
}

// products lists a step's products for a: three forward (X·Wᵀ), three
// weight gradients (dYᵀ·X) and two input gradients (dY·W; the first layer
// needs none).
func (a arch) products() []product {
	widths := []int{a.in, a.h1, a.h2, a.out}
	var ps []product
	for l := range 3 {
		ps = append(ps, product{fmt.Sprintf("fwd%d", l+1), false, true, a.batch, widths[l+1], widths[l]})
	}
	for l := 2; l >= 0; l-- {
		ps = append(ps, product{fmt.Sprintf("dW%d", l+1), true, false, widths[l+1], widths[l], a.batch})
		if l > 0 {
			ps = append(ps, product{fmt.Sprintf("dX%d", l+1), false, false, a.batch, widths[l], widths[l+1]})
		}
	}
	return ps
}

// flops is the floating-point work of one step's products, 2mnk each.
func (a arch) flops() float64 {
	var f float64
	for _, p := range a.products() {
		f += 2 * float64(p.m) * float64(p.n) * float64(p.k)
	}
	return f
}

// BenchmarkStepProducts runs the eight products of one training step, raw,
// by rhomb's kernel and by gonum's: the share of a step that is matrix
// products, and the kernels' speed on the step's own shapes.
func BenchmarkStepProducts(b *testing.B) {
	for _, a := range archs {
		stepProducts[float32](b, a)
		stepProducts[float64](b, a)
	}
}

func stepProducts[T net.Float](b *testing.B, a arch) {
	rng := rand.New(rand.NewPCG(1, 4))
	type operands struct{ a, b, c []T }
	ps := a.products()
	ops := make([]operands, len(ps))
	for i, p := range ps {
		ops[i] = operands{randomSlice[T](rng, p.m*p.k), randomSlice[T](rng, p.k*p.n), make([]T, p.m*p.n)}
	}
	ld := func(t bool, rows, cols int) int {
		if t {
			return rows
		}
		return cols
	}
	for _, im := range impls[T]() {
		b.Run(fmt.Sprintf("%s/%s/impl=%s", a, floatName[T](), im.name), func(b *testing.B) {
			run := func() {
				for i, p := range ps {
					im.f(p.tA, p.tB, p.m, p.n, p.k, ops[i].a, ld(p.tA, p.m, p.k), ops[i].b, ld(p.tB, p.k, p.n), ops[i].c, p.n)
				}
			}
			run()
			b.ResetTimer()
			t0 := cpuTime()
			for range b.N {
				run()
			}
			reportFlops[T](b, a.flops(), cpuTime()-t0)
			b.ReportMetric(float64(b.N*a.batch)/b.Elapsed().Seconds(), "samples/s")
		})
	}
}

// BenchmarkProduct is each product of the large network's step alone,
// rhomb and gonum side by side: which shapes are fast and which are not.
func BenchmarkProduct(b *testing.B) {
	a := archs[0]
	for _, p := range a.products() {
		productBench[float32](b, a, p)
		productBench[float64](b, a, p)
	}
}

func productBench[T net.Float](b *testing.B, a arch, p product) {
	rng := rand.New(rand.NewPCG(1, 5))
	x, y, c := randomSlice[T](rng, p.m*p.k), randomSlice[T](rng, p.k*p.n), make([]T, p.m*p.n)
	lda, ldb := p.k, p.n
	if p.tA {
		lda = p.m
	}
	if p.tB {
		ldb = p.k
	}
	for _, im := range impls[T]() {
		b.Run(fmt.Sprintf("%s/op=%s-%dx%dx%d/%s/impl=%s", a, p.name, p.m, p.n, p.k, floatName[T](), im.name), func(b *testing.B) {
			im.f(p.tA, p.tB, p.m, p.n, p.k, x, lda, y, ldb, c, p.n)
			b.ResetTimer()
			t0 := cpuTime()
			for range b.N {
				im.f(p.tA, p.tB, p.m, p.n, p.k, x, lda, y, ldb, c, p.n)
			}
			reportFlops[T](b, 2*float64(p.m)*float64(p.n)*float64(p.k), cpuTime()-t0)
		})
	}
}
