package loss

import "github.com/rhomb/rhomb/internal/kern"

// Float is the set of element types rhomb computes in: float32 or float64.
type Float = kern.Float

// Func is a loss on a batch of network outputs.
//
// Outputs and targets are row-major rows×cols matrices, one row per example.
// Eval returns the mean over the rows of the per-example loss, accumulated
// in float64 whatever T is, and writes into grad (rows×cols) the gradient of
// that mean with respect to out: because the loss is a mean, every gradient
// element carries a factor 1/rows, so the step size of an optimizer does not
// depend on the batch size.
//
// Only the first rows·cols elements of out, target and grad are used, so
// buffers sized for the largest batch can be passed as they are; Eval panics
// when rows or cols is below 1 or a slice is shorter than rows·cols, since
// either is a wiring mistake. grad may be nil when only the value is wanted
// (evaluation on a test set); otherwise every one of its first rows·cols
// elements is overwritten, never accumulated into. grad must not alias out
// or target. Eval reads but never modifies out and target, and allocates
// nothing.
type Func[T Float] interface {
	Eval(out, target []T, rows, cols int, grad []T) float64
	// Name is a short lower-case identifier, stable across versions, used in
	// logs and model files.
	Name() string
}

// Equilibrium is implemented by the losses that are quadratic in the
// outputs (the square losses). For a fixed normalized network f(x; V) and a
// global scale ρ, the training objective
//
//	L(ρ) = mean_n ℓ(ρ·f_n, y_n) + λρ²
//
// is then a quadratic in ρ, and RhoStar returns its minimizer ρ*, the scale
// at which ρ̇ = 0. f holds the normalized outputs f(x_n; V), rows×cols like
// the out argument of Eval, and the data term is the same mean over rows
// that Eval returns (not a sum), so λ is on the scale of the per-example
// loss. λ is the weight-decay coefficient and must be ≥ 0.
//
// When the objective does not depend on ρ at all (every f_n is zero and
// λ = 0) every ρ is a minimizer and RhoStar returns 0, the one of least
// norm. RhoStar allocates nothing, and panics on the same shape mistakes as
// Eval and on a negative λ.
//
// Quadratic returns the coefficients of the data term as a function of
// the scale: mean_n ℓ(ρ·f_n, y_n) = c − 2a·ρ + b·ρ² for a constant c, so
// that RhoStar = a/(b + λ). A trainer whose decay is not λρ² on one global
// scale (a scale per layer, say) finds its own fixed point from a and b
// (package optim).
type Equilibrium[T Float] interface {
	RhoStar(f, target []T, rows, cols int, lambda float64) float64
	Quadratic(f, target []T, rows, cols int) (a, b float64)
}
