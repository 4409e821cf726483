package optim

import (
	"math"

	"github.com/rhomb/rhomb/net"
)

// How ρ moves, for the parameterization actually trained.
//
// Write ρ_k = ‖W_k‖_F for each dense layer and ρ = ∏_k ρ_k, and let
// E = ⟨G_k, W_k⟩ with G_k = ∂L_data/∂W_k; for a network of ReLU layers
// without biases E is the same for every k (Euler's identity for
// functions homogeneous of degree one in each W_k). Under the gradient
// flow of the trained parameters with decay λ on the scales:
//
//   - a plain layer (W_k with decay): dρ_k/dt = ⟨W_k, −G_k − 2λW_k⟩/ρ_k
//     = −E/ρ_k − 2λρ_k;
//   - a normalized layer with its own scale (W_k = ρ_k V_k, ‖V_k‖ = 1 held
//     by the multiplier or by projection, decay λρ_k²): dρ_k/dt =
//     −⟨G_k, V_k⟩ − 2λρ_k, the same expression;
//   - per-unit scales (row i: W_{k,i} = ρ_{k,i} V_{k,i}): ρ_k² = Σ_i ρ_{k,i}²,
//     so dρ_k/dt = Σ_i ρ_{k,i}(−⟨G_{k,i}, V_{k,i}⟩ − 2λρ_{k,i})/ρ_k = −E/ρ_k −
//     2λρ_k again;
//   - one global scale ρ on the first normalized layer: that layer moves as
//     above and the other normalized layers are fixed at unit norm.
//
// Hence, over the layers whose norm is free (λ_k = λ for a decayed one, 0
// otherwise),
//
//	dρ/dt = ρ Σ_k (dρ_k/dt)/ρ_k = ρ Σ_k (−E/ρ_k² − 2λ_k),
//
// which for one global scale (a single free layer with ρ_k = ρ) is the
// familiar −E/ρ − 2λρ, and for L free decayed layers is
// −ρE Σ_k ρ_k⁻² − 2λLρ.
//
// The fixed point. For a square loss, with the directions held, the data
// term is c − 2aρ + bρ² (loss.Equilibrium's Quadratic), so E = ρ∂L/∂ρ =
// −2ρ(a − bρ). Every free decayed layer is at rest when E = −2λρ_k², so at
// the fixed point they share one norm r, ρ = r^L (times the fixed norms of
// the rest), and ρ(a − bρ) = λρ^{2/L}: ρ* is the largest root of
//
//	a − bρ − λρ^{2/L − 1} = 0,
//
// the stable one (below it, and for L ≥ 3 below the smaller root too, the
// scales shrink towards 0, the collapse that a small initial scale with
// weight decay risks). L = 1 gives ρ* = a/(b + λ), L = 2 gives (a − λ)/b,
// and L ≥ 3 is solved numerically. With λ = 0, ρ* = a/b in every mode.
// Layers with a fixed norm (the global mode's other layers) do not count in
// L. When some free layers decay and others do not, no finite fixed point
// exists (the undecayed layers need E = 0, the decayed ones ρ_k = 0): ρ* is
// NaN.

// scaleStructure is implemented by models whose layers' norms move
// differently from plain weights (normalize.Net): see LayerScales there.
type scaleStructure interface {
	LayerScales(dst []int8) []int8
}

// layerScales returns, per dense layer, −1 for a fixed norm, 0 free
// without decay, 1 free with decay (normalize.Net's codes; a plain
// network's layers are free, decayed when their W has Decay).
func layerScales[T net.Float](m Model[T], dst []int8) []int8 {
	if s, ok := m.(scaleStructure); ok {
		return s.LayerScales(dst)
	}
	for _, d := range m.Base().Dense() {
		c := int8(0)
		if d.W.Decay {
			c = 1
		}
		dst = append(dst, c)
	}
	return dst
}

// rhoRate is dρ/dt = ρ Σ_k (−E/ρ_k² − 2λ_k) over the free layers.
func rhoRate(e, rho float64, layerRho []float64, scales []int8, lambda float64) float64 {
	var s float64
	for k, c := range scales {
		if c < 0 {
			continue
		}
		s += -e / (layerRho[k] * layerRho[k])
		if c > 0 {
			s -= 2 * lambda
		}
	}
	return rho * s
}

// RhoStar returns the network scale at which dρ/dt = 0 for the current
// directions, for a square loss whose data term is c − 2aρ + bρ² and decay
// λ on the free layers' scales, given per dense layer the codes of
// normalize.Net.LayerScales (−1 fixed, 0 free, 1 free and decayed): the
// largest root of a − bρ − λρ^{2/L−1} = 0 with L the number of free
// layers (see the derivation above). It is 0 when the scales can only
// shrink (no positive root), and NaN when free layers differ in decay or
// none is free.
func RhoStar(a, b, lambda float64, scales []int8) float64 {
	free, decayed := 0, 0
	for _, c := range scales {
		if c >= 0 {
			free++
		}
		if c > 0 {
			decayed++
		}
	}
	switch {
	case free == 0:
		return math.NaN()
	case lambda == 0 || decayed == 0:
		if decayed > 0 || lambda == 0 {
			if b == 0 {
				return 0
			}
			return max(a/b, 0)
		}
		return math.NaN()
	case decayed != free:
		return math.NaN()
	}
	L := float64(free)
	if free == 1 {
		return max(a/(b+lambda), 0)
	}
	if free == 2 {
		if b == 0 {
			return math.NaN()
		}
		return max((a-lambda)/b, 0)
	}
	// L ≥ 3: g(ρ) = a − bρ − λρ^e with e = 2/L − 1 ∈ (−1, 0) is concave
	// (−λρ^e is concave for e ∈ (−1, 0)), rising from −∞ at 0+ to its
	// maximum at ρ_m = (−λe/b)^{1/(1−e)} and falling after it; the largest
	// root, if any, lies in [ρ_m, a/b], where g(a/b) = −λ(a/b)^e < 0.
	e := 2/L - 1
	g := func(r float64) float64 { return a - b*r - lambda*math.Pow(r, e) }
	if !(a > 0) || !(b > 0) {
		return 0
	}
	rm := math.Pow(-lambda*e/b, 1/(1-e))
	if g(rm) <= 0 {
		return 0
	}
	lo, hi := rm, a/b
	for range 200 {
		mid := lo + (hi-lo)/2
		if mid <= lo || mid >= hi {
			break
		}
		if g(mid) > 0 {
			lo = mid
		} else {
			hi = mid
		}
	}
	return lo + (hi-lo)/2
}
