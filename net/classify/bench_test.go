package classify_test

import (
	"fmt"
	"math/rand/v2"
	"path/filepath"
	"slices"
	"testing"
	"time"

	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/net/classify"
	"github.com/rhomb/rhomb/optim/modelfile"
)

// benchModel saves and loads a ReLU model of the given widths with random
// weights (speed does not depend on their values).
func benchModel[T net.Float](b *testing.B, widths []int) (*classify.Model, []float64) {
	b.Helper()
	nb := net.NewBuilder[T](widths[0])
	for i, w := range widths[1 : len(widths)-1] {
		nb.Dense(fmt.Sprint("h", i), w).ReLU(fmt.Sprint("r", i))
	}
	n, err := nb.Readout("out", widths[len(widths)-1]).Build()
	if err != nil {
		b.Fatal(err)
	}
	n.Init(net.InitSettings{Seed: 1})
	path := filepath.Join(b.TempDir(), "m.model")
	if err := modelfile.Save(path, &modelfile.Model[T]{Network: n}); err != nil {
		b.Fatal(err)
	}
	c, err := classify.Load(path)
	if err != nil {
		b.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(1, 1))
	x := make([]float64, 256*widths[0])
	for i := range x {
		x[i] = rng.NormFloat64()
	}
	return c, x
}

var benchShapes = [][]int{{16, 32, 32, 4}, {784, 512, 512, 10}}

func shapeName(s []int) string {
	out := ""
	for i, w := range s {
		if i > 0 {
			out += "-"
		}
		out += fmt.Sprint(w)
	}
	return out
}

// BenchmarkRow is single-row latency with a reused Work, for float32 and
// float64 models; it reports the median and 99th percentile of per-call
// times besides the mean (ns/op).
func BenchmarkRow(b *testing.B) {
	for _, s := range benchShapes {
		b.Run("model="+shapeName(s)+"/float=32", func(b *testing.B) { benchRow(b, benchModel[float32], s) })
		b.Run("model="+shapeName(s)+"/float=64", func(b *testing.B) { benchRow(b, benchModel[float64], s) })
	}
}

func benchRow(b *testing.B, load func(*testing.B, []int) (*classify.Model, []float64), s []int) {
	c, x := load(b, s)
	w := c.NewWork()
	f := c.Features()
	var times []time.Duration
	b.ReportAllocs()
	i := 0
	for b.Loop() {
		t0 := time.Now()
		if _, err := c.ClassifyVector(w, x[(i%256)*f:(i%256+1)*f]); err != nil {
			b.Fatal(err)
		}
		times = append(times, time.Since(t0))
		i++
	}
	slices.Sort(times)
	b.ReportMetric(float64(times[len(times)/2].Nanoseconds()), "p50-ns")
	b.ReportMetric(float64(times[len(times)*99/100].Nanoseconds()), "p99-ns")
}

// BenchmarkBatch is throughput on batches of 256 rows.
func BenchmarkBatch(b *testing.B) {
	for _, s := range benchShapes {
		b.Run("model="+shapeName(s)+"/batch=256", func(b *testing.B) {
			c, x := benchModel[float64](b, s)
			w := c.NewWork()
			ans := make([]classify.Answer, 256)
			b.ReportAllocs()
			for b.Loop() {
				if err := c.ClassifyVectors(w, x, 256, ans); err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric(float64(256*b.N)/b.Elapsed().Seconds(), "rows/s")
		})
	}
}
