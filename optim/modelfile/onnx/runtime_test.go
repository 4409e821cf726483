package onnx

import (
	"context"
	"encoding/binary"
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"time"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/data/prep"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/normalize"
	"github.com/rhomb/rhomb/optim"
	"github.com/rhomb/rhomb/optim/modelfile"
)

// This file checks exported models against onnxruntime-node, a runtime
// written independently of rhomb (install it with .ci/onnx-check). The
// models are built and initialized, not trained: the export does not care
// how the weights came about, and seeded random weights give outputs of
// order 1 with a realistic mix of signs and cancellations.

// Unit roundoffs, u = 2^−p for p-bit significands (IEEE 754 binary32:
// p = 24, binary64: p = 53; a fact of the standard).
const (
	u32 = 0x1p-24
	u64 = 0x1p-53
)

// relTol is the requirement: the runtime's outputs within 1e-5
// relative of rhomb's. Why it is reasonable for float32: one dot product
// of length n without cancellation is off by at most γ_n = nu/(1 − nu)
// relative (Higham, Accuracy and Stability of Numerical Algorithms, 2nd
// ed., §3.1; from memory), 32·u32 ≈ 1.9e-6 for the widest layer here, and
// rounding errors of independent terms add up like √n rather than n in
// practice, so a few layers of two implementations stay well inside 1e-5.
// Where the outputs cancel (an output near zero), relative error has no
// bound at all; the absolute floor B of errorBound covers that case, so a
// pair passes when |onnx − rhomb| ≤ relTol·|rhomb| + B.
const relTol = 1e-5

// gamma returns γ_n = nu/(1 − nu), the bound on the relative error of a
// sum of n products in arithmetic of unit roundoff u (Higham §3.1).
func gamma(n int, u float64) float64 { return float64(n) * u / (1 - float64(n)*u) }

// table is a set of raw rows: the columns a pipeline reads, or, for a
// model without pipeline, the feature rows themselves.
type table struct {
	cols     []prep.Column
	features [][]float64 // when cols is nil
	rows     int
}

// runtimeCase is one exported model with its inputs and rhomb's answers.
type runtimeCase struct {
	name    string
	model   []byte
	inputs  []runtimeInput
	rows    int
	outputs int
	want    []float64 // rhomb's scores, rows×outputs
	bound   []float64 // errorBound's B for each score
	class   []int     // rhomb's class (data.ClassOf) of each row
	scores  bool      // the model has only the scores output
}

type runtimeInput struct {
	name string
	cols int
	data []float32 // rows×cols
}

// prepare exports m, computes what the runtime will be fed, rhomb's
// predictions, and the error bound of each of them.
func prepare[T net.Float](t *testing.T, name string, m *modelfile.Model[T], tb table, o Options) runtimeCase {
	t.Helper()
	b, err := Marshal(m, o)
	if err != nil {
		t.Fatalf("%s: Marshal: %v", name, err)
	}
	n := m.Network
	c := runtimeCase{name: name, model: b, rows: tb.rows, outputs: n.Out(), scores: o.ScoresOnly}
	var _t T
	_, isF64 := any(_t).(float64)
	uR := u32 // rhomb's unit roundoff: the network computes in T
	if isF64 {
		uR = u64
	}
	x := make([]T, 0, tb.rows*n.In())
	var shadows []shadow
	p := m.Pipeline
	if p != nil && !o.FeatureInput {
		raw := *p
		raw.UnitNorm = false // the one-hot blocks as fed, before scaling
		var num, cat []float32
		feat := make([]float64, p.Width())
		pre := make([]float64, p.Width())
		for r := range tb.rows {
			if err := p.ApplyColumns(tb.cols, r, feat); err != nil {
				t.Fatalf("%s: row %d: %v", name, r, err)
			}
			if err := raw.ApplyColumns(tb.cols, r, pre); err != nil {
				t.Fatalf("%s: row %d: %v", name, r, err)
			}
			for _, f := range feat {
				x = append(x, T(f))
			}
			sh := shadow{a: make([]float64, len(pre)), e: make([]float64, len(pre))}
			at := 0
			for i := range p.Encodings {
				s := &p.Encodings[i]
				if s.Kind == prep.Categorical {
					for range s.Width() { // with the "other" feature of a capped column
						cat = append(cat, float32(pre[at])) // exactly 0 or 1
						sh.a[at] = pre[at]
						at++
					}
					continue
				}
				v := tb.cols[i].Num[r]
				if math.IsNaN(v) || (tb.cols[i].Missing != nil && tb.cols[i].Missing[r]) {
					v = math.NaN() // the runtime sees NaN and imputes
				}
				num = append(num, float32(v))
				if math.IsNaN(v) {
					v = s.Fill
				}
				// The runtime rounds x, the mean and the scale to float32
				// and rounds Sub and Div: first order, u(|x| + |mean|)/scale
				// from the first two and 3u|f| from the other three. Package
				// prep's float64 arithmetic adds 3·u64 relative.
				f := pre[at]
				sh.a[at] = f
				sh.e[at] = u32*(math.Abs(v)+math.Abs(s.Mean))/s.Scale + 3*u32*math.Abs(f) + 3*u64*math.Abs(f)
				at++
			}
			if p.UnitNorm {
				sh.unitNorm(uR)
			} else {
				for i := range sh.a {
					sh.e[i] += uR * math.Abs(sh.a[i]) // rhomb rounds the features to T
				}
			}
			shadows = append(shadows, sh)
		}
		if len(num) > 0 {
			c.inputs = append(c.inputs, runtimeInput{InputNumeric, len(num) / tb.rows, num})
		}
		if len(cat) > 0 {
			c.inputs = append(c.inputs, runtimeInput{InputOneHot, len(cat) / tb.rows, cat})
		}
	} else {
		var in []float32
		feat := make([]float64, n.In())
		for r := range tb.rows {
			var f []float64
			if p == nil {
				f = tb.features[r]
			} else {
				if err := p.ApplyColumns(tb.cols, r, feat); err != nil {
					t.Fatalf("%s: row %d: %v", name, r, err)
				}
				f = feat
			}
			sh := shadow{a: make([]float64, len(f)), e: make([]float64, len(f))}
			for i, v := range f {
				x = append(x, T(v))
				in = append(in, float32(v))
				sh.a[i] = float64(T(v)) // rhomb's input is the reference
				sh.e[i] = math.Abs(float64(float32(v)) - sh.a[i])
			}
			shadows = append(shadows, sh)
		}
		c.inputs = []runtimeInput{{InputFeatures, n.In(), in}}
	}
	out := m.Trainable().Forward(x, tb.rows)
	for r := range tb.rows {
		row := out[r*n.Out() : (r+1)*n.Out()]
		for _, v := range row {
			c.want = append(c.want, float64(v))
		}
		c.class = append(c.class, data.ClassOf(row))
		sh := shadows[r]
		for _, nd := range n.Nodes() {
			sh.node(t, nd, uR)
		}
		for j, v := range sh.a {
			// The shadow pass recomputes rhomb's function in float64; it
			// must agree with rhomb's own forward pass within the bound,
			// or the bound is not about the function that was run.
			if d := math.Abs(v - c.want[r*n.Out()+j]); d > sh.e[j]+relTol*math.Abs(v) {
				t.Fatalf("%s: row %d output %d: shadow pass %v, rhomb %v: the test's model of the network is wrong", name, r, j, v, c.want[r*n.Out()+j])
			}
		}
		c.bound = append(c.bound, sh.e...)
	}
	return c
}

// shadow is one row's running error analysis (Higham §3.3, "running error
// analysis"; from memory): a are the values of the exact computation on
// rhomb's weights, in float64, and e a first-order bound on
// |rhomb − exact| + |runtime − exact| for each. Second-order terms,
// O(u²) relative, are far below the relTol part of the tolerance.
type shadow struct{ a, e []float64 }

// unitNorm: f = v/‖v‖ has Jacobian (I − ffᵀ)/‖v‖, of norm at most 1/‖v‖,
// so an input error e moves each f_i by at most ‖e‖₂/‖v‖. The runtime
// rounds a sum of n squares (γ_n relative, half of it on the root), the
// square root and the division; rhomb rounds its float64 result to T. A
// zero row stays exactly zero on both sides.
func (s *shadow) unitNorm(uR float64) {
	var vv, ee float64
	for i := range s.a {
		vv += s.a[i] * s.a[i]
		ee += s.e[i] * s.e[i]
	}
	if vv == 0 {
		clear(s.e)
		return
	}
	norm, prop := math.Sqrt(vv), math.Sqrt(ee)/math.Sqrt(vv)
	for i := range s.a {
		s.a[i] /= norm
		s.e[i] = prop + (gamma(len(s.a), u32)/2+2*u32+uR)*math.Abs(s.a[i])
	}
}

func (s *shadow) node(t *testing.T, nd any, uR float64) {
	switch v := nd.(type) {
	case *net.ConstantOne[float32], *net.ConstantOne[float64]:
		s.a, s.e = append(s.a, 1), append(s.e, 0)
	case *net.Dense[float32]:
		dense(s, v.W.Value, v.Out(), v.In(), uR, false)
	case *net.Dense[float64]:
		dense(s, v.W.Value, v.Out(), v.In(), uR, true)
	case *net.ReLU[float32], *net.ReLU[float64]:
		for i, z := range s.a {
			s.a[i] = max(z, 0) // 1-Lipschitz and exact: e passes unchanged
		}
	case *net.BatchNorm[float32]:
		batchNormBound(s, v, uR, false)
	case *net.BatchNorm[float64]:
		batchNormBound(s, v, uR, true)
	case *net.SmoothReLU[float32]:
		s.smooth(v.Sharpness(), uR)
	case *net.SmoothReLU[float64]:
		s.smooth(v.Sharpness(), uR)
	case *net.PolyReLU[float32]:
		lo, hi := v.Interval()
		s.poly(v.Coefficients(), lo, hi, uR)
	case *net.PolyReLU[float64]:
		lo, hi := v.Interval()
		s.poly(v.Coefficients(), lo, hi, uR)
	default:
		t.Fatalf("no error model for node %T", nd)
	}
}

// dense: z = W·a. Propagated: |W|·e. Rounding: γ_n|W||a| for each side's
// sum of n products (Higham §3.1, for any order of summation and with or
// without fused multiply-adds), plus u32|W||a| when the runtime's weights
// are float32 roundings of float64 ones.
func dense[T net.Float](s *shadow, w []T, out, in int, uR float64, wRounded bool) {
	a, e := s.a, s.e
	z, ez := make([]float64, out), make([]float64, out)
	k := gamma(in, u32) + gamma(in, uR)
	if wRounded {
		k += u32
	}
	for r := range out {
		var sum, abs, prop float64
		for c := range in {
			wv := float64(w[r*in+c])
			sum += wv * a[c]
			abs += math.Abs(wv * a[c])
			prop += math.Abs(wv) * e[c]
		}
		z[r], ez[r] = sum, prop+k*abs
	}
	s.a, s.e = z, ez
}

// batchNormBound: y = (z − m)·a + β with a = γ/√(v + ε), the stored
// running statistics. Propagated: |a|·e. rhomb computes in float64
// (a few roundings of u64 on |a(z − m)| and |β|) and rounds y to T once,
// uR|y|. The runtime may compute the operator's definition as written or
// fold it into z·a' + b' with b' = β − m·a' (an implementation's choice;
// the operator's definition does not say): either way, a first-order bound
// is 6·u32·(|a||z| + |a||m| + |β|) for its few float32 operations on
// magnitudes up to those (an assumption about the runtime, like the one
// on Softplus, not a published figure). When the weights are float64
// they reach the runtime rounded to float32: m by u32|m| (moving y by
// |a|·u32|m|), γ by u32|γ| and v by u32·v, which move a by at most
// u32 + u32/2 relative, and β by u32|β|.
func batchNormBound[T net.Float](s *shadow, b *net.BatchNorm[T], uR float64, rounded bool) {
	st := b.Settings()
	for j, z := range s.a {
		g, sh := 1.0, 0.0
		if b.Scale != nil {
			g = float64(b.Scale.Value[j])
		}
		if b.Shift != nil {
			sh = float64(b.Shift.Value[j])
		}
		m, v := float64(b.Mean.Value[j]), float64(b.Var.Value[j])
		a := g / math.Sqrt(v+st.Epsilon)
		y := (z-m)*a + sh
		e := math.Abs(a)*s.e[j] + 6*u32*(math.Abs(a*z)+math.Abs(a*m)+math.Abs(sh)) + 5*u64*(math.Abs(a*(z-m))+math.Abs(sh)) + uR*math.Abs(y)
		if rounded {
			e += u32 * (math.Abs(a*m) + 1.5*math.Abs(a*(z-m)) + math.Abs(sh))
		}
		s.a[j], s.e[j] = y, e
	}
}

// smooth: y = softplus(βz)/β. Propagated: dy/dz = σ(βz) ≤ 1. The runtime
// rounds β and βz (2u|z| on y after the Div by β), computes softplus and
// divides. Its softplus is assumed accurate to 4u relative plus 2u
// absolute: exp and log within an ulp or two, and log(1 + e^v) losing at
// most u absolute when 1 + e^v is rounded (an assumption about the
// runtime, not a published figure). rhomb computes in float64 and rounds
// once to T.
func (s *shadow) smooth(beta, uR float64) {
	for i, z := range s.a {
		bz := beta * z
		y := (max(bz, 0) + math.Log1p(math.Exp(-math.Abs(bz)))) / beta
		s.a[i] = y
		s.e[i] += 2*u32*math.Abs(z) + 6*u32*math.Abs(y) + 2*u32/beta + (uR+4*u64)*math.Abs(y)
	}
}

// poly: the runtime's Clenshaw recurrence, op by op as polyReLU writes it,
// with a bound carried alongside each b_k: every Mul, Add and Sub rounds
// (u times the magnitude of its result), every constant is a float32
// rounding (u times its magnitude), and errors in b_{k+1}, b_{k+2} and t
// propagate with the recurrence's own coefficients. The input's error
// enters through t. rhomb runs the same recurrence in float64 (the same
// bound with u64) and rounds once to T.
func (s *shadow) poly(c []float64, lo, hi float64, uR float64) {
	mid, scale := lo/2+hi/2, 2/(hi-lo)
	for i, z := range s.a {
		y, eR := clenshawBound(c, mid, scale, z, 0, u64)
		_, eO := clenshawBound(c, mid, scale, z, s.e[i], u32)
		s.a[i] = y
		s.e[i] = eO + eR + uR*math.Abs(y)
	}
}

func clenshawBound(c []float64, mid, scale, z, ez, u float64) (y, e float64) {
	t := (z - mid) * scale
	et := scale*ez + u*(3*math.Abs(t)+math.Abs(mid)*scale)
	d := len(c) - 1
	b1, e1 := c[d], u*math.Abs(c[d])
	var b2, e2 float64
	for k := d - 1; k >= 1; k-- {
		m := 2 * t * b1
		a := m + c[k]
		b := a - b2
		eb := 2*math.Abs(t)*e1 + 2*math.Abs(b1)*et + e2 + u*(math.Abs(c[k])+math.Abs(m)+math.Abs(a)+math.Abs(b))
		b1, b2, e1, e2 = b, b1, eb, e1
	}
	m := t * b1
	a := m + c[0]
	y = a - b2
	e = math.Abs(t)*e1 + math.Abs(b1)*et + e2 + u*(math.Abs(c[0])+math.Abs(m)+math.Abs(a)+math.Abs(y))
	return y, e
}

// result is what check.js wrote for one output.
type result struct {
	Type string    `json:"type"`
	Dims []int     `json:"dims"`
	Data []float64 `json:"data"`
}

// figures are the differences a case showed: the largest relative
// difference over all scores and over those not near zero (|y| at least a
// tenth of the case's root-mean-square score, where rounding does not
// cancel to dominate), the largest absolute difference, and the largest
// difference as a fraction of its tolerance.
type figures struct{ rel, relAway, abs, frac float64 }

// mismatch compares the runtime's scores and classes with rhomb's and
// returns the first disagreement beyond tolerance ("" when none) and the
// figures.
func (c *runtimeCase) mismatch(got map[string]result) (bad string, f figures) {
	s, ok := got[OutputScores]
	if !ok || len(s.Data) != len(c.want) || len(s.Dims) != 2 || s.Dims[0] != c.rows || s.Dims[1] != c.outputs {
		return fmt.Sprintf("scores: got dims %v and %d values, want [%d %d]", s.Dims, len(s.Data), c.rows, c.outputs), f
	}
	var ss float64
	for _, w := range c.want {
		ss += w * w
	}
	away := 0.1 * math.Sqrt(ss/float64(len(c.want)))
	tol := make([]float64, len(c.want))
	for i, w := range c.want {
		d := math.Abs(s.Data[i] - w)
		tol[i] = relTol*math.Abs(w) + c.bound[i]
		if w != 0 {
			f.rel = max(f.rel, d/math.Abs(w))
		}
		if math.Abs(w) >= away {
			f.relAway = max(f.relAway, d/math.Abs(w))
		}
		f.abs = max(f.abs, d)
		f.frac = max(f.frac, d/tol[i])
		if !(d <= tol[i]) && bad == "" {
			bad = fmt.Sprintf("row %d output %d: runtime %v, rhomb %v: difference %.3g > tolerance %.3g (1e-5 relative + bound %.3g)",
				i/c.outputs, i%c.outputs, s.Data[i], w, d, tol[i], c.bound[i])
		}
	}
	if c.scores {
		if _, ok := got[OutputClass]; ok {
			return "a class output was not asked for", f
		}
		return bad, f
	}
	k, ok := got[OutputClass]
	if !ok || len(k.Data) != c.rows || k.Type != "int64" {
		return fmt.Sprintf("class: got type %q and %d values, want %d int64", k.Type, len(k.Data), c.rows), f
	}
	for r, want := range c.class {
		if int(k.Data[r]) == want || c.nearTie(r, tol) {
			continue
		}
		if bad == "" {
			bad = fmt.Sprintf("row %d: runtime class %v, rhomb %d", r, k.Data[r], want)
		}
	}
	return bad, f
}

// nearTie reports whether row r's class could flip within tolerance: the
// leading score is closer to the runner-up (or, for one score, to 0) than
// their tolerances add up to.
func (c *runtimeCase) nearTie(r int, tol []float64) bool {
	w, tl := c.want[r*c.outputs:(r+1)*c.outputs], tol[r*c.outputs:(r+1)*c.outputs]
	if c.outputs == 1 {
		return math.Abs(w[0]) <= tl[0]
	}
	top := c.class[r]
	for j := range w {
		if j != top && w[top]-w[j] <= tl[top]+tl[j] {
			return true
		}
	}
	return false
}

// runtimeCases builds one model of each exportable kind.
func runtimeCases(t *testing.T) []runtimeCase {
	const rows = 64
	rng := rand.New(rand.NewPCG(6, 17))
	mixed := mixedTable(rng, rows, false)
	var cases []runtimeCase

	// ReLU, constant feature, numeric and categorical columns interleaved
	// (the graph must reorder them), float32, plain.
	{
		p := fitPipeline(t, mixed, prep.Options{})
		n := build[float32](t, p.Width(), 1, func(b *net.Builder[float32]) {
			b.ConstantFeature("one").Dense("h1", 16).ReLU("r1").Dense("h2", 16).ReLU("r2").Readout("out", 3)
		})
		cases = append(cases, prepare(t, "relu-constant-mixed-f32", &modelfile.Model[float32]{Network: n, Pipeline: p}, mixed, Options{}))
	}
	// The same without the constant feature, weight-normalized with a
	// global scale that is then changed, so that only a synchronized W
	// gives the right answer.
	{
		p := fitPipeline(t, mixed, prep.Options{})
		n := build[float32](t, p.Width(), 2, func(b *net.Builder[float32]) {
			b.Dense("h1", 12).ReLU("r1").Readout("out", 4)
		})
		w, err := normalize.Wrap(n, normalize.Options{Scale: normalize.Global})
		if err != nil {
			t.Fatal(err)
		}
		for _, q := range w.Params() {
			if q.Name == "rho" {
				q.Value[0] *= 2.5
			}
		}
		cases = append(cases, prepare(t, "relu-normalized-global-f32", &modelfile.Model[float32]{Network: n, Normalized: w, Pipeline: p}, mixed, Options{}))
	}
	// Smooth ReLU (β = 4), numeric columns only, unit-norm rows with one
	// all-zero row, float64 weights rounded to float32 by the export.
	{
		numeric := table{cols: []prep.Column{mixed.cols[0], mixed.cols[2], mixed.cols[4]}, rows: rows}
		p := fitPipeline(t, numeric, prep.Options{UnitNorm: true})
		for i := range numeric.cols {
			num := append([]float64(nil), numeric.cols[i].Num...)
			num[0] = p.Encodings[i].Mean // row 0 encodes to zeros
			numeric.cols[i].Num = num
		}
		n := build[float64](t, p.Width(), 3, func(b *net.Builder[float64]) {
			b.ConstantFeature("one").Dense("h1", 20).SmoothReLU("s1", 4).Dense("h2", 10).SmoothReLU("s2", 4).Readout("out", 4)
		})
		cases = append(cases, prepare(t, "smooth-unitnorm-f64", &modelfile.Model[float64]{Network: n, Pipeline: p}, numeric, Options{}))
	}
	// Smooth ReLU with β = 1 (Softplus alone), imputation of missing
	// numeric and categorical values, one ±1 output, normalized per layer.
	{
		holes := mixedTable(rng, rows, true)
		p := fitPipeline(t, holes, prep.Options{Impute: true})
		n := build[float32](t, p.Width(), 4, func(b *net.Builder[float32]) {
			b.ConstantFeature("one").Dense("h1", 16).SmoothReLU("s1", 1).Readout("out", 1)
		})
		w, err := normalize.Wrap(n, normalize.Options{})
		if err != nil {
			t.Fatal(err)
		}
		cases = append(cases, prepare(t, "smooth-impute-binary-f32", &modelfile.Model[float32]{Network: n, Normalized: w, Pipeline: p}, holes, Options{}))
	}
	// Polynomial ReLUs (degree 6 least squares, degree 1 interpolation) on
	// a model without pipeline: the input is the feature row.
	{
		feats := table{rows: rows}
		for range rows {
			f := make([]float64, 5)
			for j := range f {
				f[j] = rng.NormFloat64()
			}
			feats.features = append(feats.features, f)
		}
		n := build[float32](t, 5, 5, func(b *net.Builder[float32]) {
			b.ConstantFeature("one").Dense("h1", 12).PolyReLU("p1", 6, -3, 3, net.FitLeastSquares).
				Dense("h2", 8).PolyReLU("p2", 1, -2, 2, net.FitInterpolation).Readout("out", 2)
		})
		cases = append(cases, prepare(t, "poly-features-f32", &modelfile.Model[float32]{Network: n}, feats, Options{}))
	}
	// A model with a pipeline exported for feature rows, scores only, float64.
	{
		p := fitPipeline(t, mixed, prep.Options{})
		n := build[float64](t, p.Width(), 6, func(b *net.Builder[float64]) {
			b.Dense("h1", 32).ReLU("r1").Dense("h2", 32).ReLU("r2").Readout("out", 3)
		})
		cases = append(cases, prepare(t, "relu-featureinput-f64", &modelfile.Model[float64]{Network: n, Pipeline: p}, mixed, Options{FeatureInput: true, ScoresOnly: true}))
	}
	// Batch normalization after each hidden layer, trained for a few
	// steps so that the running statistics are the network's own (they
	// are what the export stores): with a learned scale, float32; with a
	// scale and a shift, float64 rounded by the export. The running
	// statistics are then moved off the last batch's by a seeded factor,
	// so that a runtime that normalized by the batch it is given (training
	// mode) could not match.
	for _, f64 := range []bool{false, true} {
		p := fitPipeline(t, mixed, prep.Options{})
		if f64 {
			n := build[float64](t, p.Width(), 9, func(b *net.Builder[float64]) {
				b.ConstantFeature("one").Dense("h1", 16).BatchNorm("n1", true, true).ReLU("r1").
					Dense("h2", 8).BatchNorm("n2", true, true).ReLU("r2").Readout("out", 3)
			})
			trainBN(t, n, mixed, p, rng)
			cases = append(cases, prepare(t, "batchnorm-scale-shift-f64", &modelfile.Model[float64]{Network: n, Pipeline: p}, mixed, Options{}))
			continue
		}
		n := build[float32](t, p.Width(), 9, func(b *net.Builder[float32]) {
			b.ConstantFeature("one").Dense("h1", 16).BatchNorm("n1", true, false).ReLU("r1").
				Dense("h2", 8).BatchNorm("n2", true, false).ReLU("r2").Readout("out", 3)
		})
		trainBN(t, n, mixed, p, rng)
		cases = append(cases, prepare(t, "batchnorm-scale-f32", &modelfile.Model[float32]{Network: n, Pipeline: p}, mixed, Options{}))
	}
	// A categorical column with many levels capped at 4, between numeric
	// columns: its block ends in the "other" feature, which rows of
	// training levels beyond the kept 4 and rows of values never seen in
	// training (put in after fitting) both set. Imputation (of the capped
	// column too) and unit norm are on, so the other feature also goes
	// through LpNormalization.
	{
		tb, p := levelCapTable(t, rng, rows)
		n := build[float32](t, p.Width(), 8, func(b *net.Builder[float32]) {
			b.ConstantFeature("one").Dense("h1", 16).ReLU("r1").Readout("out", 3)
		})
		cases = append(cases, prepare(t, "relu-levelcap-f32", &modelfile.Model[float32]{Network: n, Pipeline: p}, tb, Options{}))
	}
	return cases
}

// levelCapTable draws a mixed table with an added column "lot" of about
// 30 levels, most of them rare, fits a pipeline capping it at 4 levels
// (imputing, unit norm) on the table, and returns the table with some lot
// values then replaced by ones never seen in training, and the pipeline.
// It fails unless the rows hold kept, pooled, unseen and missing lots.
func levelCapTable(t *testing.T, rng *rand.Rand, rows int) (table, *prep.Pipeline) {
	t.Helper()
	tb := mixedTable(rng, rows, true)
	lot := prep.Column{Name: "lot", Kind: prep.Categorical}
	for r := range rows {
		v := fmt.Sprintf("lot-%02d", rng.IntN(1+rng.IntN(30))) // small numbers more often
		if r%16 == 11 {
			v = "NA"
		}
		lot.Cat = append(lot.Cat, v)
	}
	tb.cols = append([]prep.Column{tb.cols[0], lot}, tb.cols[1:]...)
	p := fitPipeline(t, tb, prep.Options{LevelCap: 4, Impute: true, UnitNorm: true})
	s := p.Encodings[1]
	if s.OtherLevels == 0 {
		t.Fatalf("test premise: the lot column should exceed the cap: %+v", s)
	}
	lot.Cat = slices.Clone(lot.Cat)
	for r := 3; r < rows; r += 7 {
		lot.Cat[r] = fmt.Sprintf("lot-new-%d", r)
	}
	tb.cols[1] = lot
	var kept, pooled, unseen, missing int
	for _, v := range lot.Cat {
		_, in := slices.BinarySearch(s.Categories, v)
		switch {
		case v == "NA":
			missing++
		case in:
			kept++
		case strings.HasPrefix(v, "lot-new-"):
			unseen++
		default:
			pooled++
		}
	}
	if kept == 0 || pooled == 0 || unseen == 0 || missing == 0 {
		t.Fatalf("test premise: %d kept, %d pooled, %d unseen and %d missing lots", kept, pooled, unseen, missing)
	}
	return tb, p
}

// mixedTable draws invented rows: numeric columns on very different
// scales (a mass near 4200 with spread 800, so that float32 rounding of
// the raw value matters; a temperature; a small ratio) between two
// categorical ones. With holes, about one value in eight is missing.
func mixedTable(rng *rand.Rand, rows int, holes bool) table {
	mass := prep.Column{Name: "mass", Kind: prep.Numeric}
	site := prep.Column{Name: "site", Kind: prep.Categorical}
	temp := prep.Column{Name: "temp", Kind: prep.Numeric}
	shift := prep.Column{Name: "shift", Kind: prep.Categorical}
	ratio := prep.Column{Name: "ratio", Kind: prep.Numeric}
	sites := []string{"east-yard", "north-yard", "river-dock"}
	shifts := []string{"day", "night"}
	for range rows {
		mass.Num = append(mass.Num, 4200+800*rng.NormFloat64())
		site.Cat = append(site.Cat, sites[rng.IntN(len(sites))])
		temp.Num = append(temp.Num, 20+5*rng.NormFloat64())
		shift.Cat = append(shift.Cat, shifts[rng.IntN(len(shifts))])
		ratio.Num = append(ratio.Num, 0.01*rng.Float64())
	}
	if holes {
		for r := 8; r < rows; r += 8 {
			mass.Num[r] = math.NaN()
			site.Cat[r-1] = "NA"
			temp.Num[r-2] = math.NaN()
		}
	}
	return table{cols: []prep.Column{mass, site, temp, shift, ratio}, rows: rows}
}

func fitPipeline(t *testing.T, tb table, o prep.Options) *prep.Pipeline {
	t.Helper()
	p, err := prep.Fit(tb.cols, nil, o)
	if err != nil {
		t.Fatal(err)
	}
	return p
}

// trainBN runs a few training steps on the table's rows (random targets:
// only the running statistics and weights matter here) and then scales
// each running statistic by a seeded factor in [0.8, 1.25].
func trainBN[T net.Float](t *testing.T, n *net.Network[T], tb table, p *prep.Pipeline, rng *rand.Rand) {
	t.Helper()
	set := &data.Set[T]{Rows: tb.rows, Features: n.In(), Outputs: n.Out(), X: make([]T, 0, tb.rows*n.In()), Y: make([]T, tb.rows*n.Out())}
	feat := make([]float64, n.In())
	for r := range tb.rows {
		if err := p.ApplyColumns(tb.cols, r, feat); err != nil {
			t.Fatal(err)
		}
		for _, v := range feat {
			set.X = append(set.X, T(v))
		}
		set.Y[r*n.Out()+rng.IntN(n.Out())] = 1
	}
	tr, err := optim.NewTrainer[T](n, loss.Square[T]{}, set, optim.Settings{LearningRate: 0.02, BatchSize: 16, Epochs: 2, Seed: 4})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := tr.Run(context.Background()); err != nil {
		t.Fatal(err)
	}
	for _, r := range n.Running() {
		for j := range r.Value {
			r.Value[j] *= T(0.8 + 0.45*rng.Float64())
		}
	}
}

func build[T net.Float](t *testing.T, in int, seed uint64, f func(*net.Builder[T])) *net.Network[T] {
	t.Helper()
	b := net.NewBuilder[T](in)
	f(b)
	n, err := b.Build()
	if err != nil {
		t.Fatal(err)
	}
	if err := n.Init(net.InitSettings{Seed: seed}); err != nil {
		t.Fatal(err)
	}
	return n
}

// runtimePrefix returns the npm install prefix of onnxruntime-node from
// RHOMB_ONNXRUNTIME, skipping the test when it is unset unless
// RHOMB_ONNXRUNTIME_REQUIRED is set (as .ci/onnx-check sets it).
func runtimePrefix(t *testing.T) string {
	dir := os.Getenv("RHOMB_ONNXRUNTIME")
	if dir == "" {
		if os.Getenv("RHOMB_ONNXRUNTIME_REQUIRED") != "" {
			t.Fatal("RHOMB_ONNXRUNTIME_REQUIRED is set but RHOMB_ONNXRUNTIME is not: run .ci/onnx-check")
		}
		t.Skip("RHOMB_ONNXRUNTIME is not set; run .ci/onnx-check to install onnxruntime-node and run this test")
	}
	if _, err := os.Stat(filepath.Join(dir, "node_modules", "onnxruntime-node")); err != nil {
		t.Fatalf("RHOMB_ONNXRUNTIME=%s holds no node_modules/onnxruntime-node: %v", dir, err)
	}
	return dir
}

// TestRuntime runs every case in onnxruntime-node and compares.
func TestRuntime(t *testing.T) {
	prefix := runtimePrefix(t)
	cases := runtimeCases(t)
	dir := t.TempDir()
	type inputJSON struct {
		Name string `json:"name"`
		Dims []int  `json:"dims"`
		File string `json:"file"`
	}
	type caseJSON struct {
		Name   string      `json:"name"`
		Model  string      `json:"model"`
		Inputs []inputJSON `json:"inputs"`
	}
	var list []caseJSON
	for _, c := range cases {
		cj := caseJSON{Name: c.name, Model: c.name + ".onnx"}
		if err := os.WriteFile(filepath.Join(dir, cj.Model), c.model, 0o644); err != nil {
			t.Fatal(err)
		}
		for _, in := range c.inputs {
			raw := make([]byte, 4*len(in.data))
			for i, v := range in.data {
				binary.LittleEndian.PutUint32(raw[4*i:], math.Float32bits(v))
			}
			file := c.name + "." + in.name + ".f32"
			if err := os.WriteFile(filepath.Join(dir, file), raw, 0o644); err != nil {
				t.Fatal(err)
			}
			cj.Inputs = append(cj.Inputs, inputJSON{in.name, []int{c.rows, in.cols}, file})
		}
		list = append(list, cj)
	}
	js, _ := json.Marshal(list)
	if err := os.WriteFile(filepath.Join(dir, "cases.json"), js, 0o644); err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(t.Context(), 2*time.Minute)
	defer cancel()
	cmd := exec.CommandContext(ctx, "node", filepath.Join("testdata", "check.js"), dir)
	cmd.Env = append(os.Environ(), "NODE_PATH="+filepath.Join(prefix, "node_modules"))
	if out, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("node testdata/check.js: %v\n%s", err, out)
	}
	raw, err := os.ReadFile(filepath.Join(dir, "results.json"))
	if err != nil {
		t.Fatal(err)
	}
	var results map[string]map[string]result
	if err := json.Unmarshal(raw, &results); err != nil {
		t.Fatal(err)
	}
	var worst figures
	for _, c := range cases {
		for _, name := range []string{c.name, c.name + "@optimized"} {
			got, ok := results[name]
			if !ok {
				t.Errorf("%s: check.js wrote no results", name)
				continue
			}
			bad, f := c.mismatch(got)
			t.Logf("%-36s %d×%d scores: max difference relative %.2g (%.2g away from 0), absolute %.2g, %.2g of tolerance",
				name, c.rows, c.outputs, f.rel, f.relAway, f.abs, f.frac)
			if bad != "" {
				t.Errorf("%s: %s", name, bad)
			}
			worst = figures{max(worst.rel, f.rel), max(worst.relAway, f.relAway), max(worst.abs, f.abs), max(worst.frac, f.frac)}
		}
	}
	t.Logf("all cases: max difference relative %.2g (%.2g away from 0), absolute %.2g, %.2g of tolerance", worst.rel, worst.relAway, worst.abs, worst.frac)
}
