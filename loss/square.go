package loss

import "fmt"

// Square is the square loss ℓ(f, y) = Σ_j (f_j − y_j)² = ‖f − y‖², summed
// over the cols outputs of a row and averaged over the rows.
//
// For two classes use one output (cols = 1) and targets ±1; for C classes
// use C outputs and one-hot targets (1 for the class, 0 elsewhere). The
// gradient is 2(f − y)/rows.
//
// Square implements Equilibrium: see RhoStar for the scaling convention.
type Square[T Float] struct{}

var (
	_ Func[float32]        = Square[float32]{}
	_ Func[float64]        = Square[float64]{}
	_ Equilibrium[float32] = Square[float32]{}
	_ Equilibrium[float64] = Square[float64]{}
)

// Name returns "square".
func (Square[T]) Name() string { return "square" }

// Eval returns mean_n ‖f_n − y_n‖² and writes 2(f − y)/rows into grad.
func (s Square[T]) Eval(out, target []T, rows, cols int, grad []T) float64 {
	checkShape(s.Name(), out, target, grad, rows, cols)
	n := rows * cols
	out, target = out[:n], target[:n]
	scale := 2 / float64(rows)
	var sum float64
	for i, v := range out {
		d := float64(v) - float64(target[i])
		sum += d * d
		if grad != nil {
			grad[i] = T(scale * d)
		}
	}
	return sum / float64(rows)
}

// RhoStar returns the minimizer over ρ of
//
//	L(ρ) = (1/N) Σ_n ‖y_n − ρ f_n‖² + λρ²,
//
// where N = rows, f_n are the rows of f (the normalized outputs) and y_n
// the rows of target. The data term is the mean over rows that Eval returns,
// not a sum, and the weight-decay term is λρ² with no factor ½. Setting
// dL/dρ = −(2/N) Σ_n ⟨y_n − ρ f_n, f_n⟩ + 2λρ to zero gives
//
//	ρ* = (Σ_n ⟨y_n, f_n⟩ / N) / (Σ_n ‖f_n‖² / N + λ).
//
// The convention matters: summing the data term instead of averaging it,
// Σ_n ‖y_n − ρ f_n‖² + λ′ρ², is N times the objective above with λ′ = Nλ,
// and has ρ* = Σ_n ⟨y_n, f_n⟩ / (Σ_n ‖f_n‖² + λ′). Pass λ′/N to convert.
func (s Square[T]) RhoStar(f, target []T, rows, cols int, lambda float64) float64 {
	checkLambda(s.Name(), lambda)
	a, b := s.Quadratic(f, target, rows, cols)
	return vertex(a, b+lambda)
}

// Quadratic returns a = Σ_n ⟨y_n, f_n⟩/N and b = Σ_n ‖f_n‖²/N: the data
// term is (1/N)Σ‖y_n‖² − 2aρ + bρ² (see Equilibrium).
func (s Square[T]) Quadratic(f, target []T, rows, cols int) (a, b float64) {
	checkShape(s.Name(), f, target, nil, rows, cols)
	n := rows * cols
	f, target = f[:n], target[:n]
	var yf, ff float64
	for i, v := range f {
		fv := float64(v)
		yf += float64(target[i]) * fv
		ff += fv * fv
	}
	return yf / float64(rows), ff / float64(rows)
}

// vertex returns num/den, the minimizer of den·ρ² − 2·num·ρ, or 0 when den
// is 0: then num is 0 too (den = 0 means every f_n vanishes and λ = 0) and
// every ρ minimizes, of which 0 has least norm.
func vertex(num, den float64) float64 {
	if den == 0 {
		return 0
	}
	return num / den
}

// Rescaled is the rescaled square loss for many classes, from "Evaluation of
// Neural Architectures Trained with Square Loss vs Cross-Entropy in
// Classification Tasks" (ICLR 2021). With C = cols and c the class of the
// row (the index of the largest target value; targets are one-hot),
//
//	ℓ(f, y) = (1/C)·[K·(f_c − M)² + Σ_{i≠c} f_i²].
//
// K > 1 weighs the output of the true class more heavily and M > 1 asks it
// to reach M rather than 1. Their purpose is data sets with many classes:
// with one-hot targets, all but one of the C terms of the plain loss pull
// outputs towards 0, and the true class's term is a 1/C share of the loss.
// The form is as reported second-hand, not checked against the paper
// itself.
//
// The zero value of K or M means 1, so Rescaled{} is the plain square loss
// divided by C, (1/C)‖f − y‖² for one-hot y. (A target scale M of 0, which
// would make every output aim at 0, is thus not expressible.) K must not be
// negative: Eval and RhoStar panic if it is.
//
// Rescaled is a square loss with weights and a scaled target (weight K on
// output c, 1 elsewhere, target M·e_c), so it implements Equilibrium.
type Rescaled[T Float] struct {
	K, M float64
}

var (
	_ Func[float32]        = Rescaled[float32]{}
	_ Func[float64]        = Rescaled[float64]{}
	_ Equilibrium[float32] = Rescaled[float32]{}
	_ Equilibrium[float64] = Rescaled[float64]{}
)

// Name returns "rescaled-square".
func (Rescaled[T]) Name() string { return "rescaled-square" }

// params returns K and M with zero read as 1.
func (r Rescaled[T]) params() (k, m float64) {
	k, m = r.K, r.M
	if k == 0 {
		k = 1
	}
	if m == 0 {
		m = 1
	}
	if !(k > 0) {
		panic(fmt.Sprintf("loss: %s: K = %v, want K > 0 (or 0 for the default 1)", r.Name(), r.K))
	}
	return k, m
}

// Eval returns the mean over rows of ℓ and writes its gradient, (2/(C·rows))
// times K·(f_c − M) at the class c and f_i elsewhere, into grad.
func (r Rescaled[T]) Eval(out, target []T, rows, cols int, grad []T) float64 {
	checkShape(r.Name(), out, target, grad, rows, cols)
	k, m := r.params()
	scale := 2 / float64(cols*rows)
	var sum float64
	for row := range rows {
		o := out[row*cols : (row+1)*cols]
		c := argmax(target[row*cols : (row+1)*cols])
		var s float64
		for i, v := range o {
			fv, w := float64(v), 1.0
			if i == c {
				fv, w = fv-m, k
			}
			s += w * fv * fv
			if grad != nil {
				grad[row*cols+i] = T(scale * w * fv)
			}
		}
		sum += s
	}
	return sum / float64(cols*rows)
}

// RhoStar returns the minimizer over ρ of
//
//	L(ρ) = (1/N) Σ_n ℓ(ρ f_n, y_n) + λρ²,
//
// with N = rows and ℓ the rescaled loss above; as for Square, the data term
// is a mean over rows and the decay term is λρ². Writing c_n for the class
// of row n, L(ρ) = (1/(NC)) Σ_n [K(ρ f_{n,c_n} − M)² + ρ² Σ_{i≠c_n} f_{n,i}²]
// + λρ², and dL/dρ = 0 gives
//
//	ρ* = (K·M·Σ_n f_{n,c_n} / (NC)) / (Σ_n [K f_{n,c_n}² + Σ_{i≠c_n} f_{n,i}²] / (NC) + λ).
func (r Rescaled[T]) RhoStar(f, target []T, rows, cols int, lambda float64) float64 {
	checkLambda(r.Name(), lambda)
	a, b := r.Quadratic(f, target, rows, cols)
	return vertex(a, b+lambda)
}

// Quadratic returns a = K·M·Σ_n f_{n,c_n}/(NC) and b = Σ_n [K f_{n,c_n}² +
// Σ_{i≠c_n} f_{n,i}²]/(NC), the coefficients of the data term in ρ (see
// Equilibrium).
func (r Rescaled[T]) Quadratic(f, target []T, rows, cols int) (a, b float64) {
	checkShape(r.Name(), f, target, nil, rows, cols)
	k, m := r.params()
	var yf, ff float64
	for row := range rows {
		o := f[row*cols : (row+1)*cols]
		c := argmax(target[row*cols : (row+1)*cols])
		for i, v := range o {
			fv := float64(v)
			if i == c {
				yf += k * m * fv
				ff += k * fv * fv
			} else {
				ff += fv * fv
			}
		}
	}
	nc := float64(rows * cols)
	return yf / nc, ff / nc
}
