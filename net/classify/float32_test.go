package classify_test

import (
	"math"
	"path/filepath"
	"testing"

	"github.com/rhomb/rhomb/net/classify"
	"github.com/rhomb/rhomb/optim/modelfile"
)

// convert32 exports m as a float32 model file, the way docs/model-file.md
// suggests (load the float64 file as float32 and save it), and loads it.
func convert32(t *testing.T, m *modelfile.Model[float64]) (*modelfile.Model[float32], *classify.Model) {
	t.Helper()
	dir := t.TempDir()
	p64, p32 := filepath.Join(dir, "m64.model"), filepath.Join(dir, "m32.model")
	if err := modelfile.Save(p64, m); err != nil {
		t.Fatal(err)
	}
	m32, err := modelfile.Load[float32](p64)
	if err != nil {
		t.Fatal(err)
	}
	if err := modelfile.Save(p32, m32); err != nil {
		t.Fatal(err)
	}
	c, err := classify.Load(p32)
	if err != nil {
		t.Fatal(err)
	}
	if c.Info().DType != "float32" {
		t.Fatalf("dtype %s", c.Info().DType)
	}
	return m32, c
}

// TestFloat32SameBitsAsTraining: classify computes a float32 model in
// float32, as training does; the reference is the training library's
// float32 forward pass on the rows rounded to float32 (as training makes
// its float32 data set), widened exactly to float64, bit for bit.
func TestFloat32SameBitsAsTraining(t *testing.T) {
	split := demoSplit(t)
	for _, kc := range []kindCase{{"relu", "global", true, false}, {"relu", "none", true, false}, {"smooth", "per-layer", true, false}, {"poly", "per-layer", true, false}, {"poly-ls", "per-unit", true, true}} {
		m := build(t, kc, split.Train)
		m32, c := convert32(t, m)
		x32 := make([]float32, len(split.Train.X))
		for i, v := range split.Train.X {
			x32[i] = float32(v)
		}
		out := m32.Network.Forward(x32, split.Train.Rows)
		want := make([]float64, len(out))
		for i, v := range out {
			want[i] = float64(v)
		}
		sameBits(t, c, split.Train.X, split.Train.Rows, want)
	}
}

// TestFloat32Difference reports the largest difference between a float64
// model's scores and those of its float32 export on the training rows,
// and checks it against a bound derived from the rounding of the weights.
//
// Bound. The export rounds every weight, W' = W + Δ with |Δ| ≤ u|W|,
// u = 2⁻²⁴ (round to nearest float32). Through a dense layer and a ReLU
// (1-Lipschitz, elementwise), with h and h' the two models' activations,
// |h'_{l+1} − h_{l+1}| ≤ |W'||h'_l − h_l| + u|W||h_l|, elementwise (the
// triangle inequality). The recursion is run on the float64 activations
// h with |W'| ≤ (1 + u)|W|. Both models are evaluated in float64, whose
// own rounding (about 2⁻⁵³ relative per layer) is covered by doubling the
// bound.
func TestFloat32Difference(t *testing.T) {
	split := demoSplit(t)
	m := build(t, kindCase{"relu", "none", true, false}, split.Train)
	c64 := saveLoad(t, m)
	_, c32 := convert32(t, m)
	set := split.Train
	d, err := classify.MaxDifference(c64, c32, set.X, set.Rows)
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("float32 export vs float64 on %d training rows: max |Δscore| = %.3g (row %d), max relative %.3g, %d class disagreements",
		d.Rows, d.MaxAbs, d.Row, d.MaxRel, d.Disagree)
	const u = 0x1p-24
	bound := 0.0
	for r := range set.Rows {
		h := append(set.X[r*set.Features:(r+1)*set.Features:(r+1)*set.Features], 1) // the constant feature
		e := make([]float64, len(h))
		for _, dn := range m.Network.Dense() {
			w := dn.W.Value
			nh, ne := make([]float64, dn.Out()), make([]float64, dn.Out())
			for j := range nh {
				var s, abs, err float64
				for i := range h {
					s += w[j*dn.In()+i] * h[i]
					abs += math.Abs(w[j*dn.In()+i]) * math.Abs(h[i])
					err += (1 + u) * math.Abs(w[j*dn.In()+i]) * e[i]
				}
				nh[j], ne[j] = s, err+u*abs
				if !dn.Readout() {
					nh[j] = max(s, 0)
				}
			}
			h, e = nh, ne
		}
		for _, v := range e {
			bound = max(bound, 2*v)
		}
	}
	t.Logf("derived bound %.3g", bound)
	if !(d.MaxAbs <= bound) || d.MaxAbs == 0 {
		t.Fatalf("max |Δscore| = %g; want within (0, %g]", d.MaxAbs, bound)
	}
}
