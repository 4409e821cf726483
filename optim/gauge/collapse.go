package gauge

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/net"
)

// Features are the last hidden layer's outputs h_n for a labelled set of
// rows, with the readout that maps them to the network's outputs.
type Features struct {
	H      []float64 // Rows×Width, row-major
	Rows   int
	Width  int
	Labels []int // class of every row, in [0, Classes)
	// Classes is C ≥ 2.
	Classes int
	// Readout is the readout's weight matrix, Classes×Width row-major; for
	// a binary network with one ±1 output it may be 1×Width (w): it is then
	// read as the two rows (−w, +w), the class scores whose larger is the
	// sign of w·h. Nil leaves NC3 and ReadoutNorm NaN.
	Readout []float64
	// Decisions, when not nil, are the network's decided classes for the
	// rows, for NC4; nil means argmax_c (Readout·h)_c, which is the
	// network's decision when H is the readout's input.
	Decisions []int
}

// CollapseReport holds the neural-collapse measures of Papyan, Han and
// Donoho (PNAS 2020) for one set of features. Each tends to 0 under
// collapse except NC4, an agreement, which tends to 1. With μ_c the mean of
// class c's features, μ_G the mean of all rows (the paper's global mean; on
// unbalanced data it differs from the mean of the μ_c), M the C×Width
// matrix of rows μ_c − μ_G and W the readout:
//
//	Σ_W  = (1/N) Σ_n (h_n − μ_{y_n})(h_n − μ_{y_n})ᵀ     within-class covariance
//	Σ_B  = (1/C) Σ_c (μ_c − μ_G)(μ_c − μ_G)ᵀ = MᵀM/C     between-class covariance
//	NC1  = Tr(Σ_W Σ_B⁺)/C                                 variability collapse
//	NC2  : Std_c ‖μ_c − μ_G‖ / Avg_c ‖μ_c − μ_G‖         equinorm
//	       Avg_{c≠c'} |cos(μ_c − μ_G, μ_c' − μ_G) + 1/(C−1)|  equiangularity against the simplex
//	NC3  = ‖W/‖W‖_F − M/‖M‖_F‖_F                          self-duality
//	NC4  = (1/N) #{n : decision(n) = argmin_c ‖h_n − μ_c‖}  agreement with the nearest class centre
//
// Std is the population standard deviation (divide by the count). The
// paper plots the equinorm ratio and both the spread of the cosines and
// their mean distance from −1/(C−1); both are reported. Σ_B⁺ is the
// Moore–Penrose pseudo-inverse, from gonum's SVD of M.
type CollapseReport struct {
	Classes, Rows, Width int
	Counts               []int // rows per class
	NC1                  float64
	NC2Norm              float64 // equinorm of the centred class means
	NC2Angle             float64 // Avg |cos + 1/(C−1)| over pairs of classes
	NC2AngleStd          float64 // Std of the cosines over pairs of classes
	ReadoutNorm          float64 // Std/Avg of the readout rows' norms (the paper's classifier equinorm)
	NC3                  float64
	NC4                  float64 // fraction of rows where the decision is the nearest class centre
	// BetweenRank is the rank of Σ_B used for the pseudo-inverse: at most
	// C−1, and C−1 for any useful features.
	BetweenRank int
}

// ErrEmptyClass is returned by Collapse for a class with no rows, whose
// mean is undefined.
var ErrEmptyClass = errors.New("gauge: a class has no rows; neural collapse needs every class present")

// Collapse computes the neural-collapse measures of f.
func Collapse(f Features) (*CollapseReport, error) {
	C, d, N := f.Classes, f.Width, f.Rows
	switch {
	case C < 2:
		return nil, fmt.Errorf("gauge: Collapse: %d classes; need at least 2", C)
	case N < 1 || d < 1 || len(f.H) != N*d:
		return nil, fmt.Errorf("gauge: Collapse: %d feature values for %d rows of width %d", len(f.H), N, d)
	case len(f.Labels) != N:
		return nil, fmt.Errorf("gauge: Collapse: %d labels for %d rows", len(f.Labels), N)
	case f.Decisions != nil && len(f.Decisions) != N:
		return nil, fmt.Errorf("gauge: Collapse: %d decisions for %d rows", len(f.Decisions), N)
	}
	var W []float64
	switch len(f.Readout) {
	case 0:
	case C * d:
		W = f.Readout
	case d:
		if C != 2 {
			return nil, fmt.Errorf("gauge: Collapse: a readout of one row needs 2 classes, not %d", C)
		}
		W = make([]float64, 2*d)
		for j, v := range f.Readout {
			W[j], W[d+j] = -v, v
		}
	default:
		return nil, fmt.Errorf("gauge: Collapse: readout has %d values; want %d×%d", len(f.Readout), C, d)
	}
	rep := &CollapseReport{Classes: C, Rows: N, Width: d, Counts: make([]int, C)}

	mu, M, err := classMeans(f, rep)
	if err != nil {
		return nil, err
	}
	if err := withinBetween(f, rep, mu, M); err != nil {
		return nil, err
	}
	meanGeometry(rep, M, C, d)
	readoutAlignment(rep, W, M, C, d)
	nearestMean(f, rep, W, mu)
	return rep, nil
}

// classMeans counts the rows of each class and returns the class means mu
// (C×d) and M, the means centred on the global mean (C×d).
func classMeans(f Features, rep *CollapseReport) (mu, M []float64, err error) {
	C, d, N := f.Classes, f.Width, f.Rows
	mu = make([]float64, C*d)
	muG := make([]float64, d)
	for n, c := range f.Labels {
		if c < 0 || c >= C {
			return nil, nil, fmt.Errorf("gauge: Collapse: row %d has class %d; want 0 to %d", n, c, C-1)
		}
		rep.Counts[c]++
		h := f.H[n*d : (n+1)*d]
		for j, v := range h {
			mu[c*d+j] += v
			muG[j] += v
		}
	}
	for c, k := range rep.Counts {
		if k == 0 {
			return nil, nil, fmt.Errorf("%w (class %d)", ErrEmptyClass, c)
		}
		for j := range d {
			mu[c*d+j] /= float64(k)
		}
	}
	for j := range muG {
		muG[j] /= float64(N)
	}
	M = make([]float64, C*d)
	for c := range C {
		for j := range d {
			M[c*d+j] = mu[c*d+j] - muG[j]
		}
	}

	return mu, M, nil
}

// withinBetween is NC1, the within-class spread against the between-class
// spread, Tr(Σ_W Σ_B⁺)/C.
func withinBetween(f Features, rep *CollapseReport, mu, M []float64) error {
	C, d, N := f.Classes, f.Width, f.Rows
	// NC1. Σ_B = MᵀM/C = V diag(σ²/C) Vᵀ from the thin SVD M = U diag(σ) Vᵀ,
	// so Σ_B⁺ = Σ_{σ_i>tol} v_i v_iᵀ·C/σ_i², and
	// Tr(Σ_W Σ_B⁺) = Σ_i (C/σ_i²)·v_iᵀ Σ_W v_i = Σ_i (C/σ_i²)·(1/N)Σ_n ((h_n − μ_{y_n})·v_i)².
	// Working with M (C×d) instead of the d×d covariances keeps the cost at
	// O(C·d·min(C, d) + N·d·C).
	var svd mat.SVD
	if !svd.Factorize(mat.NewDense(C, d, M), mat.SVDThinV) {
		return errors.New("gauge: Collapse: the SVD of the class means did not converge")
	}
	sig := svd.Values(nil)
	var V mat.Dense
	svd.VTo(&V)
	// Singular values at or below max(C, d)·ε·σ_max are treated as zero,
	// the usual rank cut-off of a pseudo-inverse (common practice, no
	// source): the exact rank of M is at most C−1, and round-off leaves the
	// missing direction at about ε·σ_max.
	tol := float64(max(C, d)) * 0x1p-52 * sig[0]
	var nc1 float64
	r := make([]float64, d)
	for i, s := range sig {
		if !(s > tol) {
			break
		}
		rep.BetweenRank++
		v := mat.Col(nil, i, &V)
		var q float64
		for n, c := range f.Labels {
			h := f.H[n*d : (n+1)*d]
			var p float64
			for j := range d {
				r[j] = h[j] - mu[c*d+j]
				p += r[j] * v[j]
			}
			q += p * p
		}
		nc1 += float64(C) / (s * s) * q / float64(N)
	}
	rep.NC1 = nc1 / float64(C)
	if rep.BetweenRank == 0 { // all class means equal: no separation at all
		rep.NC1 = math.Inf(1)
	}

	return nil
}

// meanGeometry is NC2: how equal the centred class means' norms are, and
// how close their angles are to a simplex's.
func meanGeometry(rep *CollapseReport, M []float64, C, d int) {
	// NC2.
	norms := make([]float64, C)
	for c := range C {
		norms[c] = math.Sqrt(dot(M[c*d:(c+1)*d], M[c*d:(c+1)*d]))
	}
	rep.NC2Norm = spread(norms)
	var cosines []float64
	target := -1 / float64(C-1)
	for c := range C {
		for c2 := c + 1; c2 < C; c2++ {
			cs := dot(M[c*d:(c+1)*d], M[c2*d:(c2+1)*d]) / (norms[c] * norms[c2])
			cosines = append(cosines, cs)
			rep.NC2Angle += math.Abs(cs - target)
		}
	}
	rep.NC2Angle /= float64(len(cosines))
	_, rep.NC2AngleStd = meanStd(cosines)

}

// readoutAlignment is NC3, the distance between the normalized readout and
// the normalized centred means, and the spread of the readout's row norms.
func readoutAlignment(rep *CollapseReport, W, M []float64, C, d int) {
	// NC3 and the readout's equinorm.
	rep.NC3, rep.ReadoutNorm = math.NaN(), math.NaN()
	if W != nil {
		wn := math.Sqrt(dot(W, W))
		mn := math.Sqrt(dot(M, M))
		var s float64
		for i := range W {
			e := W[i]/wn - M[i]/mn
			s += e * e
		}
		rep.NC3 = math.Sqrt(s)
		rn := make([]float64, C)
		for c := range C {
			rn[c] = math.Sqrt(dot(W[c*d:(c+1)*d], W[c*d:(c+1)*d]))
		}
		rep.ReadoutNorm = spread(rn)
	}

}

// nearestMean is NC4: the share of rows whose decision is the class of the
// nearest class mean.
func nearestMean(f Features, rep *CollapseReport, W, mu []float64) {
	C, d, N := f.Classes, f.Width, f.Rows
	// NC4.
	rep.NC4 = math.NaN()
	if f.Decisions != nil || W != nil {
		agree := 0
		for n := range N {
			h := f.H[n*d : (n+1)*d]
			dec := 0
			if f.Decisions != nil {
				dec = f.Decisions[n]
			} else {
				best := math.Inf(-1)
				for c := range C {
					if s := dot(W[c*d:(c+1)*d], h); s > best {
						best, dec = s, c
					}
				}
			}
			near, bestD := 0, math.Inf(1)
			for c := range C {
				var s float64
				for j := range d {
					e := h[j] - mu[c*d+j]
					s += e * e
				}
				if s < bestD {
					bestD, near = s, c
				}
			}
			if dec == near {
				agree++
			}
		}
		rep.NC4 = float64(agree) / float64(N)
	}
}

// CollapseOf reads the features of every row of set at the output of the
// named node (empty: the node just before the readout, the last hidden
// layer's features) and computes Collapse with the readout's weights and
// the network's own decisions. It runs a forward pass over the set.
//
// When the node is not the readout's input, NC3 is NaN (the readout does
// not act on those features) while NC4 still compares the network's
// decision with the nearest centre in that layer.
func CollapseOf[T net.Float](m Model[T], set *data.Set[T], node string) (*CollapseReport, error) {
	base := m.Base()
	nodes := base.Nodes()
	if node == "" {
		if len(nodes) < 2 {
			return nil, errors.New("gauge: CollapseOf: the network has no hidden layer")
		}
		node = nodes[len(nodes)-2].Name()
	}
	if base.Node(node) == nil {
		return nil, fmt.Errorf("gauge: CollapseOf: the network has no node %q", node)
	}
	dense := base.Dense()
	ro := dense[len(dense)-1]
	f := Features{Rows: set.Rows, Classes: classes(set.Outputs), Labels: make([]int, 0, set.Rows), Decisions: make([]int, 0, set.Rows)}
	cols := set.Outputs
	_, err := sweep(m, set, func(start, rows int, out []T) {
		h, width := base.Output(node)
		f.Width = width
		for _, v := range h {
			f.H = append(f.H, float64(v))
		}
		for r := range rows {
			f.Labels = append(f.Labels, data.ClassOf(set.Y[(start+r)*cols:(start+r+1)*cols]))
			f.Decisions = append(f.Decisions, decide(out[r*cols:(r+1)*cols]))
		}
	})
	if err != nil {
		return nil, err
	}
	if nodes[len(nodes)-1] == net.Node[T](ro) && ro.In() == f.Width && (len(nodes) < 2 || nodes[len(nodes)-2].Name() == node) {
		f.Readout = make([]float64, len(ro.W.Value))
		for i, v := range ro.W.Value {
			f.Readout[i] = float64(v)
		}
	}
	rep, err := Collapse(f)
	if err != nil {
		return nil, err
	}
	return rep, nil
}

func dot(a, b []float64) float64 {
	var s float64
	for i := range a {
		s += a[i] * b[i]
	}
	return s
}

// meanStd returns the mean and the population standard deviation of v.
func meanStd(v []float64) (mean, std float64) {
	for _, x := range v {
		mean += x
	}
	mean /= float64(len(v))
	for _, x := range v {
		std += (x - mean) * (x - mean)
	}
	return mean, math.Sqrt(std / float64(len(v)))
}

// spread returns Std/Avg of v (population standard deviation).
func spread(v []float64) float64 {
	m, s := meanStd(v)
	return s / m
}
