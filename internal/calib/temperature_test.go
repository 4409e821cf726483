package calib

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/rhomb/rhomb/internal/arith"
	"gonum.org/v1/gonum/floats"
	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/optimize"
)

// tempObjective is the mean negative log-likelihood of softmax(β·z) as a
// function of β = 1/T (Guo et al. 2017, ICML), written independently of
// FitTemperature with gonum's floats.LogSumExp, with its first and second
// derivatives: E_p[z] − z_y and Var_p[z] averaged over the rows.
type tempObjective struct {
	z      []float64
	k      int
	labels []int
}

func (o tempObjective) eval(beta float64) (f, g, h float64) {
	bz := make([]float64, o.k)
	for i, y := range o.labels {
		row := o.z[i*o.k : (i+1)*o.k]
		for j, v := range row {
			bz[j] = beta * v
		}
		lse := floats.LogSumExp(bz)
		f += lse - bz[y]
		var m1, m2 float64
		for j, v := range row {
			p := math.Exp(bz[j] - lse)
			m1 += p * v
			m2 += p * v * v
		}
		g += m1 - row[y]
		h += m2 - m1*m1
	}
	n := float64(len(o.labels))
	return f / n, g / n, h / n
}

// drawTemperatureRows draws n rows of k logits z ~ N(0, σ²) each and a label
// from the true probabilities softmax(z/T0): data whose true temperature
// is T0 by construction.
func drawTemperatureRows(rng *rand.Rand, n, k int, sigma, t0 float64) ([]float64, []int) {
	z := make([]float64, n*k)
	labels := make([]int, n)
	p := make([]float64, k)
	for i := range labels {
		row := z[i*k : (i+1)*k]
		for j := range row {
			row[j] = sigma * rng.NormFloat64()
		}
		arith.Softmax(row, t0, p)
		u, c := rng.Float64(), 0
		for c < k-1 && u >= p[c] {
			u -= p[c]
			c++
		}
		labels[i] = c
	}
	return z, labels
}

func TestTemperatureRecoversTruth(t *testing.T) {
	const n, k, sigma = 20000, 4, 2.0
	for _, t0 := range []float64{0.5, 2} {
		rng := rand.New(rand.NewPCG(3, uint64(t0*10)))
		z, labels := drawTemperatureRows(rng, n, k, sigma, t0)
		got, err := FitTemperature(z, k, labels)
		if err != nil {
			t.Fatal(err)
		}
		o := tempObjective{z: z, k: k, labels: labels}
		beta := 1 / got
		_, _, h := o.eval(beta)
		// Delta method (from memory): Var(β̂) ≈ 1/(n·h), h the mean NLL's
		// second derivative (the Fisher information per row of this
		// one-parameter exponential family), and T = 1/β, so
		// se(T̂) ≈ se(β̂)/β̂².
		seT := 1 / math.Sqrt(float64(n)*h) / (beta * beta)
		t.Logf("T0 = %v: T = %.4f (se %.4f)", t0, got, seT)
		if d := math.Abs(got - t0); d > 4*seT {
			t.Errorf("T0 = %v: fitted T = %.4f, off by %.4f > 4 se = %.4f", t0, got, d, 4*seT)
		}

		// The same one-dimensional objective minimized with gonum's Newton
		// method. A β with derivative g is within |g|/h of the minimizer (to
		// first order), so the two may differ by (|g_fit| + |g_gonum|)/h,
		// plus rounding of β itself (4ε relative).
		p := optimize.Problem{
			Func: func(x []float64) float64 { f, _, _ := o.eval(x[0]); return f },
			Grad: func(g, x []float64) { _, g[0], _ = o.eval(x[0]) },
			Hess: func(hs *mat.SymDense, x []float64) { _, _, hh := o.eval(x[0]); hs.SetSym(0, 0, hh) },
		}
		// Past a derivative of about 1e−9 the mean of 20,000 terms no longer
		// resolves a decrease, and the line search may report a failure;
		// the last point is used and the tolerance uses its derivative.
		res, err := optimize.Minimize(p, []float64{1}, &optimize.Settings{GradientThreshold: 1e-10}, &optimize.Newton{})
		if res == nil {
			t.Fatalf("gonum optimize: %v", err)
		}
		ref := res.X[0]
		_, g1, _ := o.eval(beta)
		_, g2, _ := o.eval(ref)
		tol := (math.Abs(g1)+math.Abs(g2))/h + 4*0x1p-52*ref
		t.Logf("T0 = %v: 1/T = %.12g, gonum %.12g, derived tolerance %.2g", t0, beta, ref, tol)
		if tol > 1e-6*ref {
			t.Errorf("derived tolerance %.3g exceeds 1e-6 relative: a fit stopped early", tol)
		}
		if d := math.Abs(beta - ref); d > tol {
			t.Errorf("1/T = %.12g, gonum Newton %.12g: difference %.3g > derived %.3g", beta, ref, d, tol)
		}
	}
}

func TestTemperatureEnds(t *testing.T) {
	// Rows that are all right with wide margins: the likelihood keeps
	// rising as T falls (its derivative in β, E_p[z] − z_y, is negative for
	// every β when z_y is the strict maximum; arithmetic), so T is the
	// documented floor 1e−4.
	z := []float64{3, 0, -1, 0, 2, 1, -2, 0, 4}
	got, err := FitTemperature(z, 3, []int{0, 1, 2})
	if err != nil || got != 1e-4 {
		t.Errorf("separable rows: T = %v, %v; want 1e-4", got, err)
	}
	// Every row's scores equal: the derivative is 0 for every β, and T is
	// the documented ceiling 1e4.
	got, err = FitTemperature([]float64{1, 1, 5, 5}, 2, []int{0, 1})
	if err != nil || got != 1e4 {
		t.Errorf("constant rows: T = %v, %v; want 1e4", got, err)
	}
}

func TestTemperatureErrors(t *testing.T) {
	if _, err := FitTemperature(nil, 3, nil); !errors.Is(err, ErrTooFewRows) {
		t.Errorf("no rows: %v, want ErrTooFewRows", err)
	}
	var e *Error
	_, err := FitTemperature([]float64{1, 2, 3, 4, 5, 6}, 3, []int{0, 3})
	if !errors.Is(err, ErrLabel) || !errors.As(err, &e) || e.Row != 1 {
		t.Errorf("label 3 of 3 classes: %v, want ErrLabel at row 1", err)
	}
	_, err = FitTemperature([]float64{1, 2, 3, 4, math.Inf(1), 6}, 3, []int{0, 2})
	if !errors.Is(err, ErrNotFinite) || !errors.As(err, &e) || e.Row != 1 {
		t.Errorf("infinite score: %v, want ErrNotFinite at row 1", err)
	}
}
