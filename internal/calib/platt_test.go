package calib

import (
	"errors"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"github.com/rhomb/rhomb/internal/arith"
	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/optimize"
)

// plattObjective is the mean negative log-likelihood of Platt's
// regularized targets (Platt 1999), written here independently of
// FitPlatt as −t·log σ(z) − (1−t)·log(1−σ(z)) with log σ(z) = −softplus(−z),
// with its gradient and Hessian in (A, B).
type plattObjective struct {
	s, t []float64
}

func newPlattObjective(scores []float64, positive []bool) plattObjective {
	np := 0
	for _, p := range positive {
		if p {
			np++
		}
	}
	nn := len(positive) - np
	o := plattObjective{s: scores, t: make([]float64, len(scores))}
	for i, p := range positive {
		if p {
			o.t[i] = float64(np+1) / float64(np+2) // Platt 1999
		} else {
			o.t[i] = 1 / float64(nn+2) // Platt 1999
		}
	}
	return o
}

func softplus(x float64) float64 { return max(x, 0) + math.Log1p(math.Exp(-math.Abs(x))) }

func (o plattObjective) f(x []float64) float64 {
	var sum float64
	for i, s := range o.s {
		z := x[0]*s + x[1]
		sum += o.t[i]*softplus(-z) + (1-o.t[i])*softplus(z)
	}
	return sum / float64(len(o.s))
}

func (o plattObjective) grad(g, x []float64) {
	g[0], g[1] = 0, 0
	for i, s := range o.s {
		z := x[0]*s + x[1]
		d := 1/(1+math.Exp(-z)) - o.t[i]
		g[0] += d * s
		g[1] += d
	}
	g[0] /= float64(len(o.s))
	g[1] /= float64(len(o.s))
}

// info returns the Hessian of the summed (not mean) objective, which for
// the logistic model is the Fisher information Σ p(1−p)·x·xᵀ, x = (s, 1).
func (o plattObjective) info(x []float64) *mat.SymDense {
	h := mat.NewSymDense(2, nil)
	var h00, h01, h11 float64
	for _, s := range o.s {
		p := 1 / (1 + math.Exp(-(x[0]*s + x[1])))
		w := p * (1 - p)
		h00 += w * s * s
		h01 += w * s
		h11 += w
	}
	h.SetSym(0, 0, h00)
	h.SetSym(0, 1, h01)
	h.SetSym(1, 1, h11)
	return h
}

// gonumPlatt minimizes the same objective with gonum's Newton method and
// returns the minimizer.
func gonumPlatt(t *testing.T, o plattObjective) []float64 {
	t.Helper()
	n := float64(len(o.s))
	p := optimize.Problem{
		Func: o.f,
		Grad: o.grad,
		Hess: func(h *mat.SymDense, x []float64) {
			h.ScaleSym(1/n, o.info(x))
		},
	}
	// Past a gradient of about 1e−9 the mean of 20,000 terms no longer
	// resolves a decrease (f·ε ≈ 1e−16 > g²/λ), so gonum's line search may
	// report a failure there; its last point is still used, and the
	// tolerance of checkAgainstGonum is derived from its actual gradient.
	res, err := optimize.Minimize(p, []float64{0, 0}, &optimize.Settings{GradientThreshold: 1e-10}, &optimize.Newton{})
	if res == nil {
		t.Fatalf("gonum optimize: %v", err)
	}
	return res.X
}

// checkAgainstGonum fits with FitPlatt and with gonum and checks that
// both reach the same minimizer. The tolerance is derived: a point x with
// mean-objective gradient g is within ‖H⁻¹g‖ ≤ ‖g‖/λmin of the minimizer,
// H the mean Hessian (to first order), so the two fits may differ by at
// most (‖g_fit‖ + ‖g_gonum‖)/λmin, plus rounding of the parameters
// themselves (4ε relative). The brief asks for agreement to 1e−6; that
// tolerance is checked to be the looser one.
func checkAgainstGonum(t *testing.T, scores []float64, positive []bool) Platt {
	t.Helper()
	fit, err := FitPlatt(scores, positive)
	if err != nil {
		t.Fatal(err)
	}
	o := newPlattObjective(scores, positive)
	ref := gonumPlatt(t, o)
	mine := []float64{fit.A, fit.B}
	g1, g2 := make([]float64, 2), make([]float64, 2)
	o.grad(g1, mine)
	o.grad(g2, ref)
	var eig mat.EigenSym
	var h mat.SymDense
	h.ScaleSym(1/float64(len(scores)), o.info(mine))
	if !eig.Factorize(&h, false) {
		t.Fatal("eigen-decomposition failed")
	}
	lmin := eig.Values(nil)[0]
	tol := (math.Hypot(g1[0], g1[1]) + math.Hypot(g2[0], g2[1])) / lmin
	t.Logf("FitPlatt (%.12g, %.12g), gonum (%.12g, %.12g), derived tolerance %.2g", mine[0], mine[1], ref[0], ref[1], tol)
	for j := range 2 {
		tolj := tol + 4*0x1p-52*math.Abs(ref[j])
		if tolj > 1e-6 {
			t.Errorf("derived tolerance %.3g exceeds the 1e-6 asked for: a fit stopped early (gradients %v, %v)", tolj, g1, g2)
		}
		if d := math.Abs(mine[j] - ref[j]); d > tolj {
			t.Errorf("parameter %d: FitPlatt %.12g, gonum Newton %.12g, difference %.3g > derived %.3g", j, mine[j], ref[j], d, tolj)
		}
	}
	return fit
}

func TestPlattRecoversTruth(t *testing.T) {
	// Synthetic rows whose true probabilities are known by construction:
	// s ~ N(0, 1), P(class 1 | s) = σ(2s − 0.5).
	const n, trueA, trueB = 20000, 2.0, -0.5
	rng := rand.New(rand.NewPCG(1, 2))
	scores := make([]float64, n)
	positive := make([]bool, n)
	for i := range scores {
		s := rng.NormFloat64()
		scores[i] = s
		positive[i] = rng.Float64() < 1/(1+math.Exp(-(trueA*s+trueB)))
	}
	fit := checkAgainstGonum(t, scores, positive)

	// Standard errors from the Fisher information (maximum-likelihood
	// asymptotics, from memory): Cov(Â, B̂) ≈ I⁻¹, I = Σ p(1−p)·x·xᵀ at the
	// estimate. Platt's targets differ from the 0/1 labels by at most
	// 1/(N₋+2) and 1/(N₊+2); they shift the estimate by I⁻¹Σ(t−y)·x, which
	// the test computes and adds to the tolerance.
	o := newPlattObjective(scores, positive)
	x := []float64{fit.A, fit.B}
	var cov mat.Dense
	if err := cov.Inverse(o.info(x)); err != nil {
		t.Fatal(err)
	}
	var shift [2]float64
	for i, s := range scores {
		y := 0.0
		if positive[i] {
			y = 1
		}
		shift[0] += (o.t[i] - y) * s
		shift[1] += o.t[i] - y
	}
	bias := mat.NewVecDense(2, nil)
	bias.MulVec(&cov, mat.NewVecDense(2, shift[:]))
	seA, seB := math.Sqrt(cov.At(0, 0)), math.Sqrt(cov.At(1, 1))
	t.Logf("A = %.4f (truth 2, se %.4f), B = %.4f (truth −0.5, se %.4f), target shift (%.2g, %.2g)",
		fit.A, seA, fit.B, seB, bias.AtVec(0), bias.AtVec(1))
	if d := math.Abs(fit.A - trueA); d > 4*seA+math.Abs(bias.AtVec(0)) {
		t.Errorf("A = %.4f, truth %v: off by %.4f > 4 se = %.4f", fit.A, trueA, d, 4*seA)
	}
	if d := math.Abs(fit.B - trueB); d > 4*seB+math.Abs(bias.AtVec(1)) {
		t.Errorf("B = %.4f, truth %v: off by %.4f > 4 se = %.4f", fit.B, trueB, d, 4*seB)
	}
}

func TestPlattSeparable(t *testing.T) {
	// Scores that separate the classes: the plain maximum-likelihood fit
	// runs off to infinity, Platt's regularized targets keep it finite
	// (Platt 1999; Lin, Lin and Weng 2007). Checked against gonum.
	scores := []float64{-3, -2.5, -2, -1.2, -1, 0.8, 1, 1.5, 2.5, 4}
	positive := []bool{false, false, false, false, false, true, true, true, true, true}
	fit := checkAgainstGonum(t, scores, positive)
	if !(fit.A > 0) || math.IsInf(fit.A, 0) {
		t.Errorf("A = %v, want finite and positive", fit.A)
	}
}

func TestPlattConstantScores(t *testing.T) {
	// Every score equal: A = 0 and B the log-odds of the mean target,
	// arithmetic on Platt's targets (Platt 1999): 3 rows of class 1 have
	// target 4/5, 1 row of class 0 target 1/3, mean (12/5 + 1/3)/4 = 41/60.
	fit, err := FitPlatt([]float64{0.7, 0.7, 0.7, 0.7}, []bool{true, true, false, true})
	if err != nil {
		t.Fatal(err)
	}
	wantB := math.Log(41.0 / 19.0)
	// The closed form and the fit each take a few roundings: 1e-14.
	if fit.A != 0 || math.Abs(fit.B-wantB) > 1e-14 {
		t.Errorf("fit %+v, want A = 0, B = log(41/19) = %.15g", fit, wantB)
	}
}

func TestPlattErrors(t *testing.T) {
	_, err := FitPlatt([]float64{1}, []bool{true})
	if !errors.Is(err, ErrTooFewRows) {
		t.Errorf("one row: %v, want ErrTooFewRows", err)
	}
	_, err = FitPlatt(nil, nil)
	if !errors.Is(err, ErrTooFewRows) {
		t.Errorf("no rows: %v, want ErrTooFewRows", err)
	}
	_, err = FitPlatt([]float64{1, 2, 3}, []bool{true, true, true})
	if !errors.Is(err, ErrOneClass) || !strings.Contains(err.Error(), "all 3 rows are of class 1") {
		t.Errorf("one class: %v, want ErrOneClass saying all 3 rows are of class 1", err)
	}
	_, err = FitPlatt([]float64{1, 2, math.NaN(), 3}, []bool{true, false, true, false})
	var e *Error
	if !errors.Is(err, ErrNotFinite) || !errors.As(err, &e) || e.Row != 2 {
		t.Errorf("NaN score: %v, want ErrNotFinite at row 2", err)
	}
}

func TestPlattProb(t *testing.T) {
	// σ(z) = 1/(1 + e^{−z}) (closed form); and no overflow far out.
	p := Platt{A: 2, B: -0.5}
	for _, s := range []float64{-3, -0.25, 0, 0.25, 1, 5} {
		z := 2*s - 0.5
		want := 1 / (1 + math.Exp(-z))
		// A few roundings each side: 4ε relative.
		if got := p.Prob(s); math.Abs(got-want) > 4*0x1p-52*want {
			t.Errorf("Prob(%v) = %.17g, want %.17g", s, got, want)
		}
	}
	if got := p.Prob(1000); got != 1 {
		t.Errorf("Prob(1000) = %v, want 1", got)
	}
	// σ(−1000.5·2) underflows to 0 and must not be NaN.
	if got := p.Prob(-1000); got != 0 {
		t.Errorf("Prob(-1000) = %v, want 0", got)
	}
	// Consistency with the serving reader, not a correctness check: the
	// same arithmetic, so bit-identical.
	for _, s := range []float64{-7.3, -0.1, 0, 0.3, 12} {
		if got, want := p.Prob(s), arith.Sigmoid(p.A*s+p.B); got != want {
			t.Errorf("Prob(%v) = %v, serving computes %v", s, got, want)
		}
	}
}
