package logreg

import (
	"errors"
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/internal/conform"
	"github.com/rhomb/rhomb/internal/opendata"
	"gonum.org/v1/gonum/mat"
)

// iris returns Fisher's Iris data (vendored; REFERENCES.md, "Iris") as a
// problem of the rows whose species is in keep, labelled by their index in
// keep, with the four measurements in centimetres, unscaled.
func iris(t *testing.T, keep ...int) problem {
	t.Helper()
	x, species, err := opendata.Iris()
	if err != nil {
		t.Fatal(err)
	}
	d := problem{Features: 4, Classes: len(keep)}
	for r, s := range species {
		if c := slices.Index(keep, s); c >= 0 {
			d.X = append(d.X, x[r][:]...)
			d.Labels = append(d.Labels, c)
			d.Rows++
		}
	}
	return d
}

// TestGradient checks the analytic gradient of L against gonum's central
// finite differences (fd.Central, the project's check: relative error <
// conform.GradTol = 1e-6, derived in internal/conform/doc.go) on the 150
// Iris rows, three classes, at random parameters, with and without a
// penalty.
func TestGradient(t *testing.T) {
	d := iris(t, 0, 1, 2)
	rng := rand.New(rand.NewPCG(1, 2))
	for _, l2 := range []float64{0, 0.3} {
		o := newObjective(&d, l2)
		theta := make([]float64, o.dim)
		for i := range theta {
			theta[i] = 0.5 * rng.NormFloat64()
		}
		grad := make([]float64, o.dim)
		o.eval(theta, grad)
		f := func(x []float64) float64 { return o.eval(x, make([]float64, o.dim)) }
		conform.CheckGrad(t, "L", f, theta, grad)
	}
}

// glmIris are the coefficients of R's glm on the Iris rows of versicolor
// and virginica (values from R 4.2.2 glm), the probability of virginica
// modelled as σ(β₀ + β·x) without a penalty:
//
//	Rscript -e 'd <- droplevels(subset(iris, Species != "setosa")); fit <- glm(Species ~ ., family = binomial, data = d, control = glm.control(epsilon = 1e-14, maxit = 100)); print(coef(fit), digits = 17); print(deviance(fit), digits = 17)'
//
// R's datasets::iris agrees with the vendored copy in every value (checked
// with R when these were recorded). The two species are not linearly
// separable (UCI description; REFERENCES.md), so the unpenalized optimum
// exists. The tight epsilon makes IRLS (Newton's method, quadratically
// convergent) take one step more than its default 1e-8, which moved the
// coefficients by at most 2e-9: the step after it is smaller still, so
// R's values are exact up to the rounding of its solve.
var (
	glmIris = [5]float64{ // intercept, Sepal.Length, Sepal.Width, Petal.Length, Petal.Width
		-42.6378038130220176, -2.4652201951866566, -6.6808870140785430, 9.4293851539266296, 18.2861368878509865,
	}
	glmIrisDeviance = 11.898546791358841
)

// TestAgainstGLM fits the two-class softmax with λ = 0 to the versicolor
// and virginica rows and compares W₁ − W₀ and b₁ − b₀ with glmIris.
//
// Tolerance, from the stopping rule: the fit ends with g = ‖∇L‖∞ below
// tol = 1e-10 (the measured g, Result.GradNorm, is used: L-BFGS may
// overshoot the threshold on its last step; measured 1.3e-12).
// The gradient of L in W₁ is the gradient ∇ℓ of the binary logistic mean
// loss in β = W₁ − W₀ (and likewise for the bias), so ‖∇ℓ‖₂ ≤ √5·g. Near
// the optimum ∇ℓ = H·(β − β*) + O(‖β − β*‖²), H the Hessian of ℓ,
// computed here at R's optimum, so ‖β − β*‖₂ ≤ √5·g/λ_min(H) to first
// order; a factor 2 covers the second-order term, a relative 1e-4 of the
// first at the distances involved. R's own values carry the rounding of
// its solve, about κ(H)·ε·‖β*‖. The deviance 2n·ℓ exceeds R's by at most
// n·‖∇ℓ‖₂²/λ_min (from the same quadratic model) plus the rounding of a
// 100-term sum, below 1e-12 relative.
func TestAgainstGLM(t *testing.T) {
	d := iris(t, 1, 2) // class 0 versicolor, class 1 virginica
	if d.Rows != 100 {
		t.Fatalf("%d rows, want 100 (50 per species, REFERENCES.md)", d.Rows)
	}
	const tol = 1e-10
	m, err := Fit(d.X, d.Rows, d.Features, d.Labels, d.Classes, 0, &Settings{GradTol: tol})
	if err != nil {
		t.Fatal(err)
	}
	got := [5]float64{m.B[1] - m.B[0]}
	for j := range 4 {
		got[j+1] = m.W[4+j] - m.W[j]
	}

	// H = (1/n) Σ p(1−p) x̃x̃ᵀ at R's optimum, x̃ = (1, x).
	h := mat.NewSymDense(5, nil)
	for i := range d.Rows {
		xt := append([]float64{1}, d.X[i*4:(i+1)*4]...)
		z := 0.0
		for j, v := range xt {
			z += glmIris[j] * v
		}
		p := 1 / (1 + math.Exp(-z))
		h.SymRankOne(h, p*(1-p)/float64(d.Rows), mat.NewVecDense(5, xt))
	}
	var eig mat.EigenSym
	if !eig.Factorize(h, false) {
		t.Fatal("eigendecomposition of the Hessian failed")
	}
	ev := eig.Values(nil)
	lmin, lmax := ev[0], ev[4]
	var norm float64
	for _, v := range glmIris {
		norm += v * v
	}
	g := m.Result.GradNorm
	bound := 2*math.Sqrt(5)*g/lmin + lmax/lmin*0x1p-52*math.Sqrt(norm)
	t.Logf("‖∇L‖∞ %.3g after %d iterations, λ_min(H) %.3g, κ(H) %.3g: tolerance %.3g per coefficient", g, m.Result.Iterations, lmin, lmax/lmin, bound)
	for j := range got {
		if math.Abs(got[j]-glmIris[j]) > bound {
			t.Errorf("coefficient %d: %.15g, R's glm %.15g; difference %.3g > %.3g", j, got[j], glmIris[j], got[j]-glmIris[j], bound)
		}
	}
	dev := 2 * float64(d.Rows) * m.Result.Loss
	devTol := float64(d.Rows)*5*g*g/lmin + 1e-12*glmIrisDeviance
	if math.Abs(dev-glmIrisDeviance) > devTol {
		t.Errorf("deviance %.15g, R's %.15g; difference %.3g > %.3g", dev, glmIrisDeviance, dev-glmIrisDeviance, devTol)
	}
}

// TestOptimality checks the first-order condition at a penalized optimum
// (three Iris classes, λ = 0.01) with the gradient recomputed here in
// plain loops, independently of the package's matrix products:
//
//	∂L/∂W = (1/n) Σ_i (p_i − y_i) x_iᵀ + 2λW = 0
//	∂L/∂b = (1/n) Σ_i (p_i − y_i) = 0: the mean predicted probability of
//	each class equals its frequency
//
// both closed forms of the objective in the package documentation.
// Tolerance: the fit stops with ‖∇L‖∞ < DefaultGradTol as the package
// computes it; the recomputation differs by rounding only, a 150-term sum
// of terms below 8 (the largest measurement, in cm) in size: 150·8·2⁻⁵²,
// under 1e-12.
func TestOptimality(t *testing.T) {
	d := iris(t, 0, 1, 2)
	const l2 = 0.01
	m, err := Fit(d.X, d.Rows, d.Features, d.Labels, d.Classes, l2, nil)
	if err != nil {
		t.Fatal(err)
	}
	k, f, n := d.Classes, d.Features, d.Rows
	gw := make([]float64, k*f)
	gb := make([]float64, k)
	for i := range n {
		x := d.X[i*f : (i+1)*f]
		z := make([]float64, k)
		var sum float64
		for c := range k {
			z[c] = m.B[c]
			for j := range f {
				z[c] += m.W[c*f+j] * x[j]
			}
		}
		top := slices.Max(z)
		for c := range k {
			sum += math.Exp(z[c] - top)
		}
		for c := range k {
			r := math.Exp(z[c]-top) / sum
			if c == d.Labels[i] {
				r--
			}
			gb[c] += r / float64(n)
			for j := range f {
				gw[c*f+j] += r * x[j] / float64(n)
			}
		}
	}
	const tol = DefaultGradTol + 1e-12
	for i := range gw {
		if g := gw[i] + 2*l2*m.W[i]; math.Abs(g) > tol {
			t.Errorf("∂L/∂W[%d] = %.3g at the fitted optimum, want |·| < %g", i, g, tol)
		}
	}
	for c := range gb {
		if math.Abs(gb[c]) > tol {
			t.Errorf("class %d: mean probability minus frequency %.3g, want |·| < %g", c, gb[c], tol)
		}
	}
	// The bias is returned shifted to sum to zero (package documentation).
	if s := m.B[0] + m.B[1] + m.B[2]; math.Abs(s) > 1e-12 {
		t.Errorf("bias sums to %g, want 0", s)
	}
}

// TestTune checks tune (Tune with its trials) against fits made here one penalty at a time from
// zero: the same validation accuracy for every penalty (a warm start
// changes the path, not the strictly convex optimum), and the chosen
// penalty the best by accuracy, the larger on a tie (the rule of the
// package documentation). Data: Iris, a stratified 2:1 split (data.Stratified,
// seed 1), features standardized with the training rows' mean and
// standard deviation.
func TestTune(t *testing.T) {
	all := iris(t, 0, 1, 2)
	sets, err := data.Stratified(all.Labels, []float64{2.0 / 3, 1.0 / 3}, 1)
	if err != nil {
		t.Fatal(err)
	}
	train, val := pick(all, sets[0]), pick(all, sets[1])
	standardize(train, val)
	grid := []float64{1, 1e-3, 1e-1, 1e-2} // any order: Tune sorts it
	m, trials, err := tune(train, val, grid, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(trials) != 4 || trials[0].l2 != 1 || trials[3].l2 != 1e-3 {
		t.Fatalf("trials %+v; want the four penalties from the largest", trials)
	}
	want, wantAcc := 0.0, -1.0
	for _, tr := range trials {
		cold, err := Fit(train.X, train.Rows, train.Features, train.Labels, train.Classes, tr.l2, nil)
		if err != nil {
			t.Fatal(err)
		}
		acc := Accuracy(cold.Predict(val.X, val.Rows), val.Labels)
		if acc != tr.accuracy {
			t.Errorf("λ = %g: validation accuracy %v from a cold start, %v in Tune", tr.l2, acc, tr.accuracy)
		}
		if acc > wantAcc || (acc == wantAcc && tr.l2 > want) {
			want, wantAcc = tr.l2, acc
		}
	}
	if m.L2 != want {
		t.Errorf("Tune chose λ = %g, want %g (trials %+v)", m.L2, want, trials)
	}
	t.Logf("trials %+v", trials)
}

func pick(d problem, rows []int) problem {
	out := problem{Rows: len(rows), Features: d.Features, Classes: d.Classes}
	for _, r := range rows {
		out.X = append(out.X, d.X[r*d.Features:(r+1)*d.Features]...)
		out.Labels = append(out.Labels, d.Labels[r])
	}
	return out
}

func standardize(train, other problem) {
	f := train.Features
	for j := range f {
		var s, ss float64
		for i := range train.Rows {
			s += train.X[i*f+j]
		}
		mean := s / float64(train.Rows)
		for i := range train.Rows {
			ss += (train.X[i*f+j] - mean) * (train.X[i*f+j] - mean)
		}
		sd := math.Sqrt(ss / float64(train.Rows-1))
		for _, d := range []problem{train, other} {
			for i := range d.Rows {
				d.X[i*f+j] = (d.X[i*f+j] - mean) / sd
			}
		}
	}
}

// TestPredict checks scores and predictions on a model written by hand
// (worked by hand; a property of the definitions, any values would do).
func TestPredict(t *testing.T) {
	m := &Model{Classes: 3, Features: 2, W: []float64{1, 0, 0, 1, -1, -1}, B: []float64{0, 0.5, 0}}
	x := []float64{2, 1, 0, 0, -1, -1, 0.5, 0}
	// Scores: (2, 1.5, −3), (0, 0.5, 0), (−1, −0.5, 2), (0.5, 0.5, −0.5).
	wantZ := []float64{2, 1.5, -3, 0, 0.5, 0, -1, -0.5, 2, 0.5, 0.5, -0.5}
	if z := m.Scores(x, 4); !slices.Equal(z, wantZ) {
		t.Errorf("scores %v, want %v", z, wantZ)
	}
	// The last row ties classes 0 and 1: the first wins.
	if p := m.Predict(x, 4); !slices.Equal(p, []int{0, 1, 2, 0}) {
		t.Errorf("predictions %v, want [0 1 2 0]", p)
	}
}

// TestMajorityAccuracy checks the baseline and the accuracy on small cases
// worked by hand (common practice, no source, for the definitions).
func TestMajorityAccuracy(t *testing.T) {
	if c := Majority([]int{2, 0, 2, 1, 2, 0}, 3); c != 2 {
		t.Errorf("majority of 2,0,2,1,2,0: %d, want 2 (three of six)", c)
	}
	if c := Majority([]int{1, 0, 0, 1}, 3); c != 0 {
		t.Errorf("majority of 1,0,0,1: %d, want 0 (tie of two each, the smaller index)", c)
	}
	// Truth 0,1,2,2 predicted 0,1,1,2: 3 of 4 right; recalls 1/1, 1/1,
	// 1/2, balanced accuracy 2.5/3.
	if a := Accuracy([]int{0, 1, 1, 2}, []int{0, 1, 2, 2}); a != 0.75 {
		t.Errorf("accuracy %v, want 3/4", a)
	}
	// Three recalls and one division: a few ulps of 5/6.
	if b := BalancedAccuracy([]int{0, 1, 1, 2}, []int{0, 1, 2, 2}, 3); math.Abs(b-5.0/6) > 1e-15 {
		t.Errorf("balanced accuracy %v, want 5/6", b)
	}
}

// TestErrors checks that bad data and an unfinished fit are errors, not
// models (properties of any data; the rows are invented).
func TestErrors(t *testing.T) {
	good := problem{X: []float64{0, 1, 1, 0}, Rows: 2, Features: 2, Labels: []int{0, 1}, Classes: 2}
	bad := []problem{
		{X: []float64{0, math.NaN(), 1, 0}, Rows: 2, Features: 2, Labels: []int{0, 1}, Classes: 2},
		{X: []float64{0, 1, 1, 0}, Rows: 2, Features: 2, Labels: []int{0, 2}, Classes: 2},
		{X: []float64{0, 1, 1}, Rows: 2, Features: 2, Labels: []int{0, 1}, Classes: 2},
		{X: []float64{0, 1, 1, 0}, Rows: 2, Features: 2, Labels: []int{0, 0}, Classes: 1},
	}
	for i, d := range bad {
		if _, err := Fit(d.X, d.Rows, d.Features, d.Labels, d.Classes, 1, nil); err == nil {
			t.Errorf("bad data %d: no error", i)
		}
	}
	if _, err := Fit(good.X, good.Rows, good.Features, good.Labels, good.Classes, -1, nil); err == nil {
		t.Error("negative penalty: no error")
	}
	// Two separable rows without a penalty: no optimum, the weights grow
	// without end, and the fit ends unconverged (at the iteration limit or
	// in a stalled line search, as the loss flattens towards 0).
	if _, err := Fit(good.X, good.Rows, good.Features, good.Labels, good.Classes, 0, &Settings{GradTol: 1e-300, MaxIterations: 50}); !errors.Is(err, ErrNotConverged) {
		t.Errorf("separable rows without a penalty: %v, want ErrNotConverged", err)
	}
	if _, _, err := Tune(good.X, good.Rows, good.Labels, good.X, good.Rows, good.Labels, 2, 2, []float64{1, 0}); err == nil {
		t.Error("zero penalty in the grid: no error")
	}
}
