package conform

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/rhomb/rhomb/net"
)

// guard is written around every buffer handed to a node; a node that writes
// outside its rows overwrites it.
const guard = -123456.75

// Node checks a node of the float64 network: Connect gives the expected
// width, Forward and Backward write only inside their buffers, allocate
// nothing, and the gradients Backward writes (input and parameters) agree
// with finite differences of φ = ⟨dy, Forward(x)⟩.
//
// input draws one input value; a node with kinks (ReLU) passes a generator
// that keeps values away from them by more than the difference step.
// Parameters are drawn N(0, 1) unless init is non-nil.
func Node(t *testing.T, nd net.Node[float64], in, wantOut, rows int, input func(*rand.Rand) float64) {
	t.Helper()
	rng := rand.New(rand.NewPCG(1, 1))
	out, err := nd.Connect(in)
	if err != nil {
		t.Fatalf("%s: Connect(%d): %v", nd.Name(), in, err)
	}
	if out != wantOut {
		t.Fatalf("%s: Connect(%d) = %d, want %d", nd.Name(), in, out, wantOut)
	}
	for _, p := range nd.Params() {
		if len(p.Value) != p.Rows*p.Cols || len(p.Grad) != p.Rows*p.Cols {
			t.Fatalf("%s: param %s holds %d values and %d gradients, want %d×%d", nd.Name(), p.Name, len(p.Value), len(p.Grad), p.Rows, p.Cols)
		}
		for i := range p.Value {
			p.Value[i] = rng.NormFloat64()
		}
	}
	x := guarded(rows*in, func() float64 { return input(rng) })
	dy := guarded(rows*out, rng.NormFloat64)
	y := guarded(rows*out, nil)
	dx := guarded(rows*in, nil)

	xs, ys, dys, dxs := inner(x, rows*in), inner(y, rows*out), inner(dy, rows*out), inner(dx, rows*in)
	nd.Forward(xs, ys, rows)
	nd.Backward(xs, ys, dys, dxs, rows)
	for name, b := range map[string][]float64{"y": y, "dx": dx} {
		if b[0] != guard || b[len(b)-1] != guard {
			t.Errorf("%s: wrote outside buffer %s", nd.Name(), name)
		}
	}
	for i, v := range ys {
		if math.IsNaN(v) {
			t.Fatalf("%s: Forward gave NaN at %d", nd.Name(), i)
		}
	}

	// Snapshot the analytic gradients before finite differences reuse y.
	gx := append([]float64(nil), dxs...)
	gp := make([][]float64, len(nd.Params()))
	for i, p := range nd.Params() {
		gp[i] = append([]float64(nil), p.Grad...)
	}
	phi := func() float64 {
		nd.Forward(xs, ys, rows)
		s := 0.0
		for i := range ys {
			s += dys[i] * ys[i]
		}
		return s
	}
	x0 := append([]float64(nil), xs...)
	CheckGrad(t, nd.Name()+": input gradient", func(v []float64) float64 {
		copy(xs, v)
		return phi()
	}, append([]float64(nil), x0...), gx)
	copy(xs, x0) // the differences leave the last coordinate perturbed
	for i, p := range nd.Params() {
		saved := append([]float64(nil), p.Value...)
		CheckGrad(t, nd.Name()+": gradient of "+p.Name, func(v []float64) float64 {
			copy(p.Value, v)
			return phi()
		}, saved, gp[i])
		copy(p.Value, saved)
	}

	// A node that needs no input gradient gets dx = nil.
	nd.Backward(xs, ys, dys, nil, rows)

	if allocs := testing.AllocsPerRun(10, func() {
		nd.Forward(xs, ys, rows)
		nd.Backward(xs, ys, dys, dxs, rows)
	}); allocs != 0 {
		t.Errorf("%s: Forward+Backward allocate %v times per call, want 0", nd.Name(), allocs)
	}
}

// guarded returns a buffer of n values (drawn by fill, or zero) with one
// guard value on each side.
func guarded(n int, fill func() float64) []float64 {
	b := make([]float64, n+2)
	b[0], b[n+1] = guard, guard
	if fill != nil {
		for i := 1; i <= n; i++ {
			b[i] = fill()
		}
	}
	return b
}

func inner(b []float64, n int) []float64 { return b[1 : n+1 : n+1] }

// AwayFromZero draws from N(0, 1) conditioned on |x| > 0.05, keeping inputs
// of a ReLU far (by four orders of magnitude) from its kink compared with the
// finite-difference step.
func AwayFromZero(rng *rand.Rand) float64 {
	for {
		if v := rng.NormFloat64(); math.Abs(v) > 0.05 {
			return v
		}
	}
}
