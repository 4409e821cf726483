package gauge

import (
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"gonum.org/v1/gonum/stat"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/normalize"
)

// A linear binary classifier w = (3, 4), ρ = ‖w‖ = 5. Worked by hand: the
// normalized margins y·w·x/5 of the rows below are 1, −0.2, 0.4, 0.8
// (the definition of the binary normalized margin, REFERENCES.md).
func TestMarginsLinearBinary(t *testing.T) {
	n, err := net.NewBuilder[float64](2).Readout("out", 1).Build()
	if err != nil {
		t.Fatal(err)
	}
	copy(n.Dense()[0].W.Value, []float64{3, 4})
	set := &data.Set[float64]{Rows: 4, Features: 2, Outputs: 1,
		X: []float64{1, 0.5, 0, 0.25, 0, 0.5, 0.8, 0.4},
		Y: []float64{1, -1, 1, 1}}
	// w·x: 5, 1, 2, 4; times y: 5, −1, 2, 4; over 5: 1, −0.2, 0.4, 0.8.
	rep, err := MarginsOf[float64](n, set, MarginOptions{Gamma: 0.4, Probs: []float64{0, 0.5, 1}, KeepValues: true, Edges: []float64{-1, 0, 0.5, 1}})
	if err != nil {
		t.Fatal(err)
	}
	want := []float64{1, -0.2, 0.4, 0.8}
	for i, w := range want {
		if math.Abs(rep.Values[i]-w) > 4*eps { // two products and a division
			t.Errorf("margin %d = %.17g, want %v", i, rep.Values[i], w)
		}
	}
	a := rep.All
	close := func(x, y float64) bool { return math.Abs(x-y) <= 8*eps }
	if a.Rows != 4 || !close(a.Min, -0.2) || !close(a.Max, 1) || !close(a.Mean, 0.5) || a.Below != 1 || a.FracBelow != 0.25 || a.Errors != 1 {
		t.Errorf("all = %+v; want min −0.2, max 1, mean 0.5, 1 below 0.4 (0.4 = 2/5 is exact and not below), 1 error", a)
	}
	// Median of {−0.2, 0.4, 0.8, 1} by linear interpolation: (0.4+0.8)/2.
	if !close(a.Quantiles[1], 0.6) {
		t.Errorf("median %v, want 0.6", a.Quantiles[1])
	}
	// Class 0 (y = −1) holds row 1 only; class 1 the other three.
	if rep.PerClass[0].Rows != 1 || !close(rep.PerClass[0].Min, -0.2) || rep.PerClass[1].Rows != 3 || !close(rep.PerClass[1].Min, 0.4) {
		t.Errorf("per class %+v", rep.PerClass)
	}
	// Bins [−1,0), [0,0.5), [0.5,1]: −0.2 | 0.4 | 0.8, 1.
	if !slices.Equal(rep.Hist.Counts, []int{1, 1, 2}) || rep.Hist.Under+rep.Hist.Over != 0 {
		t.Errorf("histogram %+v, want counts 1 1 2", rep.Hist)
	}
	if !close(rep.Rho, 5) {
		t.Errorf("ρ = %v, want 5", rep.Rho)
	}
}

// Three classes, readout rows (1,0), (0,1), (−1,−1): ρ = ‖W‖_F = 2. Worked
// by hand for x = (2, 1), class 0: outputs 2, 1, −3; margin (2 − 1)/2 = 0.5.
// For x = (1, 3), class 0: outputs 1, 3, −4; margin (1 − 3)/2 = −1.
func TestMarginsMultiClass(t *testing.T) {
	n, _ := net.NewBuilder[float64](2).Readout("out", 3).Build()
	copy(n.Dense()[0].W.Value, []float64{1, 0, 0, 1, -1, -1})
	set := &data.Set[float64]{Rows: 2, Features: 2, Outputs: 3,
		X: []float64{2, 1, 1, 3}, Y: []float64{1, 0, 0, 1, 0, 0}}
	rep, err := MarginsOf[float64](n, set, MarginOptions{KeepValues: true})
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(rep.Values[0]-0.5) > 4*eps || math.Abs(rep.Values[1]+1) > 4*eps {
		t.Errorf("margins %v, want [0.5 −1]", rep.Values)
	}
	if rep.PerClass[1].Rows != 0 || !math.IsNaN(rep.PerClass[1].Mean) {
		t.Errorf("empty class 1: %+v, want 0 rows and NaN", rep.PerClass[1])
	}
}

// Positive homogeneity (REFERENCES.md): f(x; cW_1, W_2) = c·f(x; W), so the
// normalized margins do not change when a layer is scaled, and a
// weight-normalized wrapper (same function) gives the same margins.
func TestMarginsScaleFree(t *testing.T) {
	n, _ := net.NewBuilder[float64](4).Dense("h", 8).ReLU("r").Readout("out", 3).Build()
	_ = n.Init(net.InitSettings{Seed: 5})
	rng := rand.New(rand.NewPCG(4, 4))
	set := &data.Set[float64]{Rows: 300, Features: 4, Outputs: 3}
	for r := range set.Rows {
		for range 4 {
			set.X = append(set.X, rng.NormFloat64())
		}
		y := []float64{0, 0, 0}
		y[r%3] = 1
		set.Y = append(set.Y, y...)
	}
	a, err := MarginsOf[float64](n, set, MarginOptions{KeepValues: true})
	if err != nil {
		t.Fatal(err)
	}
	for i := range n.Dense()[0].W.Value {
		n.Dense()[0].W.Value[i] *= 7
	}
	w, _ := normalize.Wrap(n, normalize.Options{})
	b, err := MarginsOf[float64](w, set, MarginOptions{KeepValues: true})
	if err != nil {
		t.Fatal(err)
	}
	// Each output is a sum of 8·4 products; scaling and re-normalizing
	// changes it by a few ulps relative to the output's size ‖x‖·√…: allow
	// 100·ε times the largest |margin|.
	scale := max(math.Abs(a.All.Min), math.Abs(a.All.Max))
	for i := range a.Values {
		if math.Abs(a.Values[i]-b.Values[i]) > 100*eps*scale {
			t.Fatalf("row %d: margin %v before scaling, %v after", i, a.Values[i], b.Values[i])
		}
	}
	if math.Abs(b.Rho/a.Rho-7) > 100*eps {
		t.Errorf("ρ ratio %v, want 7", b.Rho/a.Rho)
	}
}

// quantile is definition 7 of Hyndman and Fan (1996) (from memory): for
// {1, 2, 3, 4}, p = 0.25 gives h = 0.75, 1 + 0.75 = 1.75; p = 0.5 the
// usual median 2.5; p = 0 and 1 the extremes.
func TestQuantile(t *testing.T) {
	x := []float64{1, 2, 3, 4}
	for _, c := range []struct{ p, want float64 }{{0, 1}, {0.25, 1.75}, {0.5, 2.5}, {0.9, 3.7}, {1, 4}} {
		if got := quantile(x, c.p); math.Abs(got-c.want) > 4*eps*4 {
			t.Errorf("quantile(%v) = %v, want %v", c.p, got, c.want)
		}
	}
	if quantile([]float64{7}, 0.3) != 7 {
		t.Error("one value")
	}
}

// Against gonum's stat.Histogram (reference library), which counts
// [e_i, e_{i+1}) and needs every value below the last edge.
func TestHistogramAgainstGonum(t *testing.T) {
	rng := rand.New(rand.NewPCG(6, 6))
	x := make([]float64, 1000)
	for i := range x {
		x[i] = rng.NormFloat64()
	}
	edges := UniformEdges(-5, 5, 37)
	h, err := newHistogram(x, edges)
	if err != nil {
		t.Fatal(err)
	}
	s := slices.Clone(x)
	slices.Sort(s)
	ref := stat.Histogram(nil, edges, s, nil)
	for i := range ref {
		if float64(h.Counts[i]) != ref[i] {
			t.Fatalf("bin %d: %d, gonum %v", i, h.Counts[i], ref[i])
		}
	}
	// Outside values are counted, not dropped; the last edge is inside.
	h, _ = newHistogram([]float64{-2, 0, 1, 3, math.NaN()}, []float64{-1, 0, 1})
	if h.Under != 1 || h.Over != 1 || h.NaN != 1 || !slices.Equal(h.Counts, []int{0, 2}) {
		t.Errorf("%+v: want under 1, over 1, NaN 1, counts [0 2]", h)
	}
	if _, err := newHistogram(x, []float64{0, 0}); err == nil {
		t.Error("equal edges accepted")
	}
}

// TestNearlyEqualMarginsHistogram: margins one ulp apart (a zero-loss fit
// gives them) still get increasing default edges.
func TestNearlyEqualMarginsHistogram(t *testing.T) {
	m := 0.0523493068345801
	edges := UniformEdges(m, math.Nextafter(m, 1), 20)
	if _, err := newHistogram([]float64{m}, edges); err == nil {
		t.Fatal("collapsed edges accepted; the test no longer exercises the case")
	}
	n, err := net.NewBuilder[float64](1).Readout("w", 1).Build()
	if err != nil {
		t.Fatal(err)
	}
	n.Params()[0].Value[0] = 1
	x := []float64{1, math.Nextafter(1, 2)}
	set := &data.Set[float64]{X: x, Y: []float64{1, 1}, Rows: 2, Features: 1, Outputs: 1}
	if _, err := MarginsOf[float64](n, set, MarginOptions{}); err != nil {
		t.Errorf("margins one ulp apart: %v", err)
	}
}
