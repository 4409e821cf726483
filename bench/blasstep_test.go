package bench

import (
	"context"
	"fmt"
	"math/rand/v2"
	"os"
	"testing"
	"time"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/optim"
)

// blasStep is the training step written with gonum's BLAS (Dgemm or Sgemm
// from blas/gonum) and plain loops: the "blas Gemm + loops" way, which,
// unlike mat.Dense, also exists in float32. Same work as step and
// gonumStep: forward, square-loss gradient 2(o − y)/rows, backward
// without the input gradient, plain SGD.
type blasStep[T net.Float] struct {
	a                            arch
	w, dw                        [3][]T
	x, y                         []T
	h1, r1, h2, r2, o, g, d2, d1 []T
}

func newBlasStep[T net.Float](s *step[T]) *blasStep[T] {
	a := s.a
	bs := &blasStep[T]{a: a, x: s.x, y: s.y}
	for i, p := range s.n.Params() {
		bs.w[i] = append([]T(nil), p.Value...)
		bs.dw[i] = make([]T, len(p.Value))
	}
	mk := func(w int) []T { return make([]T, a.batch*w) }
	bs.h1, bs.r1, bs.d1 = mk(a.h1), mk(a.h1), mk(a.h1)
	bs.h2, bs.r2, bs.d2 = mk(a.h2), mk(a.h2), mk(a.h2)
	bs.o, bs.g = mk(a.out), mk(a.out)
	return bs
}

func (s *blasStep[T]) grads() float64 {
	a, g := s.a, gonumGemm[T]
	g(false, true, a.batch, a.h1, a.in, s.x, a.in, s.w[0], a.in, s.h1, a.h1)
	for i, v := range s.h1 {
		s.r1[i] = max(v, 0)
	}
	g(false, true, a.batch, a.h2, a.h1, s.r1, a.h1, s.w[1], a.h1, s.h2, a.h2)
	for i, v := range s.h2 {
		s.r2[i] = max(v, 0)
	}
	g(false, true, a.batch, a.out, a.h2, s.r2, a.h2, s.w[2], a.h2, s.o, a.out)
	scale := 2 / T(a.batch)
	var sum float64
	for i, v := range s.o {
		d := v - s.y[i]
		sum += float64(d * d)
		s.g[i] = scale * d
	}
	g(true, false, a.out, a.h2, a.batch, s.g, a.out, s.r2, a.h2, s.dw[2], a.h2)
	g(false, false, a.batch, a.h2, a.out, s.g, a.out, s.w[2], a.h2, s.d2, a.h2)
	for i, v := range s.h2 {
		if !(v > 0) {
			s.d2[i] = 0
		}
	}
	g(true, false, a.h2, a.h1, a.batch, s.d2, a.h2, s.r1, a.h1, s.dw[1], a.h1)
	g(false, false, a.batch, a.h1, a.h2, s.d2, a.h2, s.w[1], a.h1, s.d1, a.h1)
	for i, v := range s.h1 {
		if !(v > 0) {
			s.d1[i] = 0
		}
	}
	g(true, false, a.h1, a.in, a.batch, s.d1, a.h1, s.x, a.in, s.dw[0], a.in)
	return sum / float64(a.batch)
}

func (s *blasStep[T]) update() {
	for i, w := range s.w {
		for j, d := range s.dw[i] {
			w[j] -= lr * d
		}
	}
}

// BenchmarkStepBlas is the step with gonum's BLAS and loops, in float32
// and float64.
func BenchmarkStepBlas(b *testing.B) {
	for _, a := range archs {
		b.Run(a.String()+"/"+floatName[float32](), func(b *testing.B) {
			runSteps[float32](b, newBlasStep(newStep[float32](b, a, rand.New(rand.NewPCG(1, 2)))), a)
		})
		b.Run(a.String()+"/"+floatName[float64](), func(b *testing.B) {
			runSteps[float64](b, newBlasStep(newStep[float64](b, a, rand.New(rand.NewPCG(1, 2)))), a)
		})
	}
}

// BenchmarkRatio runs, in each operation, one step of rhomb and one of
// each gonum baseline (mat.Dense in float64, BLAS and loops in both
// precisions) on the same data, interleaved, timing each: whatever else the
// machine is doing affects them alike. It reports each one's samples/s
// and rhomb's speed-up over each baseline ("x-mat", "x-blas").
func BenchmarkRatio(b *testing.B) {
	for _, a := range archs {
		b.Run(a.String()+"/"+floatName[float32](), func(b *testing.B) { ratio[float32](b, a) })
		b.Run(a.String()+"/"+floatName[float64](), func(b *testing.B) { ratio[float64](b, a) })
	}
}

func ratio[T net.Float](b *testing.B, a arch) {
	s := newStep[T](b, a, rand.New(rand.NewPCG(1, 2)))
	impls := map[string]stepper{"rhomb": s, "blas": newBlasStep(newStep[T](b, a, rand.New(rand.NewPCG(1, 2))))}
	order := []string{"rhomb", "blas"}
	var z T
	if _, ok := any(z).(float64); ok {
		impls["mat"] = gonumFrom(any(newStep[float64](b, a, rand.New(rand.NewPCG(1, 2)))).(*step[float64]))
		order = append(order, "mat")
	}
	spent := map[string]time.Duration{}
	for _, name := range order {
		impls[name].grads()
		impls[name].update()
	}
	b.ResetTimer()
	for range b.N {
		for _, name := range order {
			t0 := time.Now()
			impls[name].grads()
			impls[name].update()
			spent[name] += time.Since(t0)
		}
	}
	b.StopTimer()
	rate := func(name string) float64 { return float64(b.N*a.batch) / spent[name].Seconds() }
	for _, name := range order {
		b.ReportMetric(rate(name), name+"-samples/s")
		if name != "rhomb" {
			b.ReportMetric(rate("rhomb")/rate(name), "x-"+name)
		}
	}
	gf := rate("rhomb") * a.flops() / float64(a.batch) / 1e9
	b.ReportMetric(gf, "rhomb-GFLOP/s")
	if p := peakOf[T](); p > 0 {
		b.ReportMetric(gf/p, "rhomb-of-peak")
	}
}

// BenchmarkEpochRows is one epoch of optim.Trainer on the large network
// at 10k, 20k, 40k and 60k Fashion-MNIST-shaped rows (random data, batch
// 128): the cost per epoch should grow linearly with the rows, so
// samples/s should stay flat. Slow (seconds per operation), so it runs
// only when RHOMB_EPOCH_ROWS is set, and best alone with -benchtime 1x:
//
//	RHOMB_EPOCH_ROWS=1 go test -run '^$' -bench EpochRows -benchtime 1x ./bench/
func BenchmarkEpochRows(b *testing.B) {
	if os.Getenv("RHOMB_EPOCH_ROWS") == "" {
		b.Skip("set RHOMB_EPOCH_ROWS=1 to run (seconds per operation)")
	}
	a := archs[0]
	for _, rows := range []int{10000, 20000, 40000, 60000} {
		b.Run(fmt.Sprintf("%s/rows=%d/%s", a, rows, floatName[float32]()), func(b *testing.B) { epochRows[float32](b, a, rows) })
	}
}

func epochRows[T net.Float](b *testing.B, a arch, rows int) {
	x, y := draw[T](rand.New(rand.NewPCG(1, 3)), rows, a.in, a.out)
	n := build[T](b, a)
	n.Forward(x, a.batch)
	n.Backward(make([]T, a.batch*a.out))
	set := &data.Set[T]{X: x, Y: y, Rows: rows, Features: a.in, Outputs: a.out}
	tr, err := optim.NewTrainer[T](n, loss.Square[T]{}, set, optim.Settings{LearningRate: lr, BatchSize: a.batch, Epochs: b.N, Seed: 1})
	if err != nil {
		b.Fatal(err)
	}
	b.ResetTimer()
	res, err := tr.Run(context.Background())
	b.StopTimer()
	if err != nil || res.Status != optim.Finished {
		b.Fatalf("Run: %+v, %v", res, err)
	}
	b.ReportMetric(b.Elapsed().Seconds()/float64(b.N), "s/epoch")
	report(b, rows, res.Loss)
}
