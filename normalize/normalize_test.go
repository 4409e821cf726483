package normalize_test

import (
	"errors"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"github.com/rhomb/rhomb/internal/conform"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/normalize"
)

func network(t testing.TB, seed uint64) *net.Network[float64] {
	n, err := net.NewBuilder[float64](5).ConstantFeature("one").
		Dense("h1", 7).ReLU("r1").Dense("h2", 6).ReLU("r2").Readout("out", 3).Build()
	if err != nil {
		t.Fatal(err)
	}
	if err := n.Init(net.InitSettings{Seed: seed, Rho0: 2}); err != nil {
		t.Fatal(err)
	}
	return n
}

var modes = map[string]normalize.Options{
	"per-layer":             {},
	"per-layer/projection":  {Hold: normalize.Projection},
	"global":                {Scale: normalize.Global},
	"global/projection":     {Scale: normalize.Global, Hold: normalize.Projection},
	"per-unit":              {PerUnit: true},
	"per-unit/projection":   {PerUnit: true, Hold: normalize.Projection},
	"skip-readout":          {SkipReadout: true},
	"chosen-layers":         {Layers: []string{"h2"}},
	"global/skip-readout":   {Scale: normalize.Global, SkipReadout: true},
	"per-layer/no-retract":  {NoRetraction: true},
	"per-unit/skip-readout": {PerUnit: true, SkipReadout: true},
}

func batch(seed uint64, rows int) (x, y []float64) {
	rng := rand.New(rand.NewPCG(seed, seed))
	x = make([]float64, rows*5)
	for i := range x {
		x[i] = rng.NormFloat64()
	}
	y = make([]float64, rows*3)
	for r := range rows {
		y[r*3+rng.IntN(3)] = 1
	}
	return x, y
}

// TestWrapKeepsTheFunction: splitting W = ρ·V changes the parameters, not
// the function (positive homogeneity; REFERENCES.md).
func TestWrapKeepsTheFunction(t *testing.T) {
	x, _ := batch(1, 6)
	for name, o := range modes {
		n := network(t, 3)
		want := append([]float64(nil), n.Forward(x, 6)...)
		w, err := normalize.Wrap(n, o)
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		got := w.Forward(x, 6)
		for i := range want {
			// Rescaling by 1/ρ_k and back costs a few roundings per weight.
			if math.Abs(got[i]-want[i]) > 1e-13*math.Abs(want[i])+1e-15 {
				t.Errorf("%s: output %d: %v after wrapping, %v before", name, i, got[i], want[i])
			}
		}
	}
}

// TestGradients checks every mode's scale and direction gradients against
// central differences of the square loss computed through the wrapper
// (W = ρ·V is rebuilt from the perturbed parameters by Sync). Under
// Projection the direction gradient is the plain one; under Multiplier it
// is the plain one projected onto the tangent space of the sphere
// (REFERENCES.md, weight-normalized dynamics).
func TestGradients(t *testing.T) {
	const rows = 8
	x, y := batch(2, rows)
	sq := loss.Square[float64]{}
	g := make([]float64, rows*3)
	for name, o := range modes {
		n := network(t, 4)
		w, err := normalize.Wrap(n, o)
		if err != nil {
			t.Fatal(err)
		}
		sq.Eval(w.Forward(x, rows), y, rows, 3, g)
		w.Backward(g)
		objective := func() float64 { w.Sync(); return sq.Eval(w.Forward(x, rows), y, rows, 3, g) }
		for _, p := range w.Params() {
			grad := append([]float64(nil), p.Grad...)
			v0 := append([]float64(nil), p.Value...)
			num := func(v []float64) float64 { copy(p.Value, v); return objective() }
			isDir := strings.HasSuffix(p.Name, ".V")
			if isDir && o.Hold == normalize.Multiplier {
				// Compare with the projected numerical gradient.
				plain := numGrad(num, v0)
				copy(p.Value, v0)
				project(plain, v0, o.PerUnit, p.Rows, p.Cols)
				if e := conform.RelErr(grad, plain); !(e < conform.GradTol) {
					t.Errorf("%s: %s: projected gradient relative error %.3g", name, p.Name, e)
				}
				continue
			}
			conform.CheckGrad(t, name+": "+p.Name, num, v0, grad)
			copy(p.Value, v0)
		}
	}
}

func numGrad(f func([]float64) float64, x []float64) []float64 {
	// Central differences with the step gonum's fd uses for that formula.
	const h = 6e-6
	g := make([]float64, len(x))
	v := append([]float64(nil), x...)
	for i := range v {
		v[i] = x[i] + h
		fp := f(v)
		v[i] = x[i] - h
		fm := f(v)
		v[i] = x[i]
		g[i] = (fp - fm) / (2 * h)
	}
	return g
}

func project(g, v []float64, perUnit bool, rows, cols int) {
	blocks, size := 1, len(v)
	if perUnit {
		blocks, size = rows, cols
	}
	for b := range blocks {
		gb, vb := g[b*size:(b+1)*size], v[b*size:(b+1)*size]
		var gv, vv float64
		for i := range vb {
			gv += gb[i] * vb[i]
			vv += vb[i] * vb[i]
		}
		for i := range vb {
			gb[i] -= gv / vv * vb[i]
		}
	}
}

func TestParamsAndDecay(t *testing.T) {
	w, err := normalize.Wrap(network(t, 1), normalize.Options{SkipReadout: true})
	if err != nil {
		t.Fatal(err)
	}
	var names []string
	for _, p := range w.Params() {
		names = append(names, p.Name)
		wantDecay := !strings.HasSuffix(p.Name, ".V")
		if p.Decay != wantDecay {
			t.Errorf("%s: Decay = %v, want %v", p.Name, p.Decay, wantDecay)
		}
	}
	if got, want := strings.Join(names, " "), "h1.rho h1.V h2.rho h2.V out.W"; got != want {
		t.Errorf("params %q, want %q", got, want)
	}
	g, err := normalize.Wrap(network(t, 1), normalize.Options{Scale: normalize.Global})
	if err != nil {
		t.Fatal(err)
	}
	names = names[:0]
	for _, p := range g.Params() {
		names = append(names, p.Name)
	}
	if got, want := strings.Join(names, " "), "rho h1.V h2.V out.V"; got != want {
		t.Errorf("global params %q, want %q", got, want)
	}
	// The global scale is the product of the layer norms (ρ0 = 2 at Init).
	if r := g.Params()[0].Value[0]; math.Abs(r-2) > 1e-14 {
		t.Errorf("global ρ = %v, want 2", r)
	}
}

func TestWrapErrors(t *testing.T) {
	if _, err := normalize.Wrap(network(t, 1), normalize.Options{PerUnit: true, Scale: normalize.Global}); err == nil {
		t.Error("PerUnit with Global accepted")
	}
	if _, err := normalize.Wrap(network(t, 1), normalize.Options{Layers: []string{"r1"}}); err == nil || !strings.Contains(err.Error(), `"r1"`) {
		t.Errorf("a ReLU named as a layer to normalize: %v", err)
	}
	zero, err := net.NewBuilder[float64](3).Dense("h", 2).ReLU("r").Readout("out", 1).Build()
	if err != nil {
		t.Fatal(err)
	}
	if _, err := normalize.Wrap(zero, normalize.Options{}); !errors.Is(err, normalize.ErrZeroWeights) || !strings.Contains(err.Error(), `"h"`) {
		t.Errorf("uninitialized network: %v, want ErrZeroWeights naming layer h", err)
	}
}

// TestConstrain: after a gradient step on the raw parameters, Constrain
// returns every direction to unit norm (per layer, or per row), to
// round-off: a rescale by 1/‖V‖ leaves |‖V‖ − 1| within a few ε.
func TestConstrain(t *testing.T) {
	const rows = 8
	x, y := batch(5, rows)
	g := make([]float64, rows*3)
	for name, o := range modes {
		w, err := normalize.Wrap(network(t, 6), o)
		if err != nil {
			t.Fatal(err)
		}
		for range 5 {
			loss.Square[float64]{}.Eval(w.Forward(x, rows), y, rows, 3, g)
			w.Backward(g)
			for _, p := range w.Params() {
				for j := range p.Value {
					p.Value[j] -= 0.3 * p.Grad[j]
				}
			}
			w.Constrain()
		}
		for k, nrm := range w.DirectionNorms(nil) {
			off := math.Abs(nrm - 1)
			if o.NoRetraction {
				if off == 0 {
					t.Errorf("%s: layer %d: no drift at all without retraction; is retraction on?", name, k)
				}
				continue
			}
			if off > 4e-16*8 {
				t.Errorf("%s: layer %d: ‖V‖ = %v after Constrain", name, k, nrm)
			}
		}
	}
}
