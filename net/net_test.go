package net_test

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/rhomb/rhomb/internal/conform"
	"github.com/rhomb/rhomb/net"
)

func TestNodesConform(t *testing.T) {
	for _, rows := range []int{1, 3, 8} {
		conform.Node(t, net.NewDense[float64]("dense", 5), 4, 5, rows, func(r *rand.Rand) float64 { return r.NormFloat64() })
		conform.Node(t, net.NewReLU[float64]("relu"), 6, 6, rows, conform.AwayFromZero)
		b := net.NewBuilder[float64](3).ConstantFeature("one").Readout("out", 1)
		n, err := b.Build()
		if err != nil {
			t.Fatal(err)
		}
		// A fresh node: the built one is connected already.
		_ = n
		conform.Node(t, constantNode(t), 3, 4, rows, func(r *rand.Rand) float64 { return r.NormFloat64() })
	}
}

// constantNode returns an unconnected constant-one node by building a
// network around a fresh one and taking it out.
func constantNode(t *testing.T) net.Node[float64] {
	n, err := net.NewBuilder[float64](1).ConstantFeature("one").Readout("out", 1).Build()
	if err != nil {
		t.Fatal(err)
	}
	return n.Node("one")
}

func TestBuildErrorsNameTheNode(t *testing.T) {
	cases := []struct {
		name  string
		build func() (*net.Network[float64], error)
		node  string
		index int
		is    error
	}{
		{"duplicate", func() (*net.Network[float64], error) {
			return net.NewBuilder[float64](4).Dense("h", 3).ReLU("h").Readout("out", 1).Build()
		}, "h", 1, net.ErrDuplicateName},
		{"readout not last", func() (*net.Network[float64], error) {
			return net.NewBuilder[float64](4).Readout("out", 2).ReLU("r").Build()
		}, "out", 0, net.ErrMisplaced},
		{"no readout", func() (*net.Network[float64], error) {
			return net.NewBuilder[float64](4).Dense("h", 3).ReLU("r").Build()
		}, "r", 1, net.ErrNoReadout},
		{"constant not first", func() (*net.Network[float64], error) {
			return net.NewBuilder[float64](4).Dense("h", 3).ConstantFeature("one").Readout("out", 1).Build()
		}, "one", 1, net.ErrMisplaced},
		{"zero width", func() (*net.Network[float64], error) {
			return net.NewBuilder[float64](4).Dense("h", 0).ReLU("r").Readout("out", 1).Build()
		}, "h", 0, nil},
	}
	for _, c := range cases {
		_, err := c.build()
		var be *net.BuildError
		if !errors.As(err, &be) {
			t.Errorf("%s: error %v, want a *net.BuildError", c.name, err)
			continue
		}
		if be.Node != c.node || be.Index != c.index {
			t.Errorf("%s: error names node %q at %d, want %q at %d (%v)", c.name, be.Node, be.Index, c.node, c.index, err)
		}
		if c.is != nil && !errors.Is(err, c.is) {
			t.Errorf("%s: error %v does not wrap %v", c.name, err, c.is)
		}
	}
	if _, err := net.NewBuilder[float64](0).Readout("out", 1).Build(); err == nil {
		t.Error("zero input width built without error")
	}
}

// deep builds a bias-free ReLU network with He-normal weights.
func deep(t testing.TB, widths []int, constant bool, seed uint64) *net.Network[float64] {
	b := net.NewBuilder[float64](widths[0])
	if constant {
		b.ConstantFeature("one")
	}
	for i, w := range widths[1 : len(widths)-1] {
		b.Dense("h"+string(rune('1'+i)), w).ReLU("r" + string(rune('1'+i)))
	}
	n, err := b.Readout("out", widths[len(widths)-1]).Build()
	if err != nil {
		t.Fatal(err)
	}
	if err := n.Init(net.InitSettings{Seed: seed}); err != nil {
		t.Fatal(err)
	}
	return n
}

func randRows(rng *rand.Rand, rows, width int) []float64 {
	x := make([]float64, rows*width)
	for i := range x {
		x[i] = rng.NormFloat64()
	}
	return x
}

// TestNetworkGradient checks a whole network's backward pass against
// central differences of φ = ⟨dy, f(x; W)⟩ over every weight.
func TestNetworkGradient(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 3))
	n := deep(t, []int{5, 7, 6, 3}, true, 11)
	rows := 4
	x := randRows(rng, rows, 5)
	dy := randRows(rng, rows, 3)
	n.Forward(x, rows)
	n.Backward(dy)
	for _, p := range n.Params() {
		grad := append([]float64(nil), p.Grad...)
		w0 := append([]float64(nil), p.Value...)
		conform.CheckGrad(t, p.Name, func(w []float64) float64 {
			copy(p.Value, w)
			out := n.Forward(x, rows)
			s := 0.0
			for i := range out {
				s += dy[i] * out[i]
			}
			return s
		}, w0, grad)
		copy(p.Value, w0)
	}
}

// TestHomogeneity checks positive homogeneity of bias-free ReLU networks
// (REFERENCES.md, "Positive homogeneity"): f(x; W) = ρ·f(x; V) with
// ρ = ∏‖W_k‖_F, f(cx) = c·f(x) for c > 0, and Euler's identity
// ⟨W_k, ∂f/∂W_k⟩ = f for every layer k.
func TestHomogeneity(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 5))
	n := deep(t, []int{6, 9, 8, 7, 3}, false, 2)
	rows := 5
	x := randRows(rng, rows, 6)
	f := append([]float64(nil), n.Forward(x, rows)...)
	// Relative tolerance: a handful of roundings per multiply-add over
	// depth 4 and width ≤ 9 gives errors of a few ε·‖f‖; 1e-13 ≈ 450ε.
	const tol = 1e-13
	scale := maxAbs(f)

	rho := n.Rho()
	saved := make([][]float64, len(n.Dense()))
	for k, d := range n.Dense() {
		saved[k] = append([]float64(nil), d.W.Value...)
		r := net.FrobeniusNorm(d.W.Value)
		for j := range d.W.Value {
			d.W.Value[j] /= r
		}
	}
	fv := n.Forward(x, rows)
	for i := range f {
		if d := math.Abs(f[i] - rho*fv[i]); d > tol*scale {
			t.Errorf("f(x;W)[%d] = %v, ρ·f(x;V) = %v: differ by %.3g", i, f[i], rho*fv[i], d)
		}
	}
	for k, d := range n.Dense() {
		copy(d.W.Value, saved[k])
	}

	const c = 3.7
	cx := append([]float64(nil), x...)
	for i := range cx {
		cx[i] *= c
	}
	fc := n.Forward(cx, rows)
	for i := range f {
		if d := math.Abs(fc[i] - c*f[i]); d > tol*c*scale {
			t.Errorf("f(cx)[%d] = %v, c·f(x) = %v", i, fc[i], c*f[i])
		}
	}

	// Euler: for each row r and output j, ⟨W_k, ∂f_rj/∂W_k⟩ = f_rj.
	for r := range rows {
		for j := range 3 {
			n.Forward(x[r*6:(r+1)*6], 1)
			dy := make([]float64, 3)
			dy[j] = 1
			n.Backward(dy)
			for _, d := range n.Dense() {
				s := 0.0
				for i := range d.W.Value {
					s += d.W.Value[i] * d.W.Grad[i]
				}
				if diff := math.Abs(s - f[r*3+j]); diff > tol*scale {
					t.Errorf("row %d output %d layer %s: ⟨W, ∂f/∂W⟩ = %v, f = %v", r, j, d.Name(), s, f[r*3+j])
				}
			}
		}
	}
}

func TestConstantFeatureKeepsWeightHomogeneity(t *testing.T) {
	// With the constant feature, homogeneity in the weights still holds
	// (the 1 is an input, not a weight); homogeneity in x does not.
	rng := rand.New(rand.NewPCG(6, 6))
	n := deep(t, []int{4, 6, 2}, true, 9)
	x := randRows(rng, 3, 4)
	f := append([]float64(nil), n.Forward(x, 3)...)
	const c = 2.5
	for _, d := range n.Dense() {
		for j := range d.W.Value {
			d.W.Value[j] *= c
		}
	}
	g := n.Forward(x, 3)
	for i := range f {
		// Two layers scaled by c: f scales by c².
		if math.Abs(g[i]-c*c*f[i]) > 1e-13*maxAbs(f)*c*c {
			t.Errorf("scaling both layers by %v: f[%d] %v → %v, want %v", c, i, f[i], g[i], c*c*f[i])
		}
	}
}

func TestInitRho0(t *testing.T) {
	n := deep(t, []int{10, 20, 20, 4}, false, 1)
	for _, rho0 := range []float64{1e-3, 0.5, 8} {
		if err := n.Init(net.InitSettings{Scheme: net.LeCunNormal, Rho0: rho0, Seed: 4}); err != nil {
			t.Fatal(err)
		}
		// Three layers, each rescaled in float64: ρ is exact to a few ε.
		if got := n.Rho(); math.Abs(got-rho0) > 1e-14*rho0 {
			t.Errorf("Rho0 %v: ∏‖W_k‖ = %v", rho0, got)
		}
		per := math.Cbrt(rho0)
		for _, d := range n.Dense() {
			if got := net.FrobeniusNorm(d.W.Value); math.Abs(got-per) > 1e-14*per {
				t.Errorf("Rho0 %v: layer %s norm %v, want %v", rho0, d.Name(), got, per)
			}
		}
	}
	if err := n.Init(net.InitSettings{Rho0: -1}); err == nil {
		t.Error("negative Rho0 accepted")
	}
}

// TestHeNormalScale checks the He-normal variance 2/in (He et al. 2015) on a
// wide layer: the sample variance of 256·512 draws has relative standard
// error √(2/131072) ≈ 0.0039; 5 standard errors is 2%.
func TestHeNormalScale(t *testing.T) {
	n, err := net.NewBuilder[float64](512).Readout("out", 256).Build()
	if err != nil {
		t.Fatal(err)
	}
	if err := n.Init(net.InitSettings{Scheme: net.HeNormal, Seed: 8}); err != nil {
		t.Fatal(err)
	}
	w := n.Dense()[0].W.Value
	ss := 0.0
	for _, v := range w {
		ss += v * v
	}
	if got, want := ss/float64(len(w)), 2.0/512; math.Abs(got/want-1) > 0.02 {
		t.Errorf("He-normal variance %v, want %v within 2%%", got, want)
	}
}

func TestInitSameSeedSameBits(t *testing.T) {
	a := deep(t, []int{8, 16, 3}, true, 42)
	b := deep(t, []int{8, 16, 3}, true, 42)
	c := deep(t, []int{8, 16, 3}, true, 43)
	same, differ := true, false
	for i, p := range a.Params() {
		for j := range p.Value {
			if math.Float64bits(p.Value[j]) != math.Float64bits(b.Params()[i].Value[j]) {
				same = false
			}
			if p.Value[j] != c.Params()[i].Value[j] {
				differ = true
			}
		}
	}
	if !same {
		t.Error("same seed gave different weights")
	}
	if !differ {
		t.Error("different seeds gave the same weights")
	}
}

func TestForwardBackwardAllocateNothing(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 7))
	for _, shape := range [][]int{{16, 32, 32, 4}, {300, 256, 256, 10}} {
		n := deep(t, shape, true, 1)
		rows := 64
		x := randRows(rng, rows, shape[0])
		dy := randRows(rng, rows, shape[len(shape)-1])
		n.Forward(x, rows)
		n.Backward(dy)
		if a := testing.AllocsPerRun(5, func() {
			n.Forward(x, rows)
			n.Backward(dy)
			n.Forward(x, rows/2) // a smaller batch reuses the buffers
		}); a != 0 {
			t.Errorf("%v: %v allocations per pass, want 0", shape, a)
		}
	}
}

func TestFloat32MatchesFloat64(t *testing.T) {
	rng := rand.New(rand.NewPCG(9, 9))
	n64 := deep(t, []int{12, 24, 24, 3}, true, 5)
	b := net.NewBuilder[float32](12).ConstantFeature("one").Dense("h1", 24).ReLU("r1").Dense("h2", 24).ReLU("r2").Readout("out", 3)
	n32, err := b.Build()
	if err != nil {
		t.Fatal(err)
	}
	for i, p := range n64.Params() {
		for j, v := range p.Value {
			n32.Params()[i].Value[j] = float32(v)
		}
	}
	rows := 10
	x := randRows(rng, rows, 12)
	x32 := make([]float32, len(x))
	for i, v := range x {
		x32[i] = float32(v)
	}
	f64 := n64.Forward(x, rows)
	f32 := n32.Forward(x32, rows)
	// Rounding the inputs and weights to float32 (relative 2^-24 ≈ 6e-8)
	// and summing ≤ 25 terms per unit over three layers: a relative error
	// of order 1e-6 of the output's scale; 1e-5 leaves room for
	// cancellation in individual outputs.
	for i := range f64 {
		if d := math.Abs(float64(f32[i]) - f64[i]); d > 1e-5*maxAbs(f64) {
			t.Errorf("output %d: float32 %v, float64 %v", i, f32[i], f64[i])
		}
	}
}

func maxAbs(v []float64) float64 {
	m := 0.0
	for _, x := range v {
		m = max(m, math.Abs(x))
	}
	return m
}
