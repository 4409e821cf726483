package conform

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/diff/fd"
)

// GradTol is the relative error allowed between an analytic gradient and
// its finite-difference estimate; see the package documentation.
const GradTol = 1e-6

// RelErr returns ‖a − b‖₂ / max(‖a‖₂, ‖b‖₂), or 0 when both are zero.
func RelErr(a, b []float64) float64 {
	var d, na, nb float64
	for i := range a {
		d += (a[i] - b[i]) * (a[i] - b[i])
		na += a[i] * a[i]
		nb += b[i] * b[i]
	}
	den := math.Sqrt(max(na, nb))
	if den == 0 {
		return 0
	}
	return math.Sqrt(d) / den
}

// CheckGrad compares grad, the analytic gradient of f at x, with gonum's
// central finite differences, and reports a test failure naming what when
// the relative error exceeds GradTol. x is restored before it returns.
func CheckGrad(t testing.TB, what string, f func(x []float64) float64, x, grad []float64) {
	t.Helper()
	num := fd.Gradient(nil, f, x, &fd.Settings{Formula: fd.Central})
	if e := RelErr(grad, num); !(e < GradTol) {
		t.Errorf("%s: analytic gradient differs from central differences: relative error %.3g, want < %g\nanalytic %v\nnumeric  %v",
			what, e, GradTol, head(grad), head(num))
	}
}

func head(v []float64) []float64 {
	if len(v) > 8 {
		return v[:8]
	}
	return v
}
