package gauge

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/net"
)

const eps = 0x1p-52 // float64 machine epsilon

// simplexETF returns C unit vectors in R^d (d ≥ C) with pairwise cosines
// −1/(C−1): √(C/(C−1))·(e_c − 1/C), the simplex equiangular tight frame
// of Papyan, Han and Donoho (PNAS 2020), carried into R^d by a random
// matrix with orthonormal columns (gonum QR) so that no coordinate is
// special.
func simplexETF(t *testing.T, C, d int, rng *rand.Rand) [][]float64 {
	t.Helper()
	a := mat.NewDense(d, C, nil)
	for i := range d {
		for j := range C {
			a.Set(i, j, rng.NormFloat64())
		}
	}
	var qr mat.QR
	qr.Factorize(a)
	var q mat.Dense
	qr.QTo(&q) // d×d orthogonal; its first C columns are orthonormal
	s := math.Sqrt(float64(C) / float64(C-1))
	out := make([][]float64, C)
	for c := range C {
		out[c] = make([]float64, d)
		for j := range C {
			e := -1.0 / float64(C)
			if j == c {
				e += 1
			}
			for i := range d {
				out[c][i] += s * e * q.At(i, j)
			}
		}
	}
	return out
}

// features lays out per rows per class: row r of class c is means[c] + dev(c, r).
func features(means [][]float64, per int, dev func(c, r int) []float64) Features {
	C, d := len(means), len(means[0])
	f := Features{Rows: C * per, Width: d, Classes: C}
	for c := range C {
		for r := range per {
			var e []float64
			if dev != nil {
				e = dev(c, r)
			}
			for j := range d {
				v := means[c][j]
				if e != nil {
					v += e[j]
				}
				f.H = append(f.H, v)
			}
			f.Labels = append(f.Labels, c)
		}
	}
	return f
}

func flat(rows [][]float64, scale float64) []float64 {
	var out []float64
	for _, r := range rows {
		for _, v := range r {
			out = append(out, scale*v)
		}
	}
	return out
}

// Exact collapse: every feature equals its class mean, the means form a
// simplex ETF and the readout is the means. Papyan, Han and Donoho (PNAS
// 2020) define NC1–NC4 so that this configuration gives NC1 = NC2 = NC3 = 0
// and full agreement with the nearest centre.
func TestCollapseExactSimplex(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 1))
	for _, tc := range []struct{ C, d, per int }{{3, 3, 4}, {4, 7, 3}, {10, 12, 5}} {
		means := simplexETF(t, tc.C, tc.d, rng)
		const scale = 2.5 // collapse is scale-free: a scaled frame is still one
		for c := range means {
			for j := range means[c] {
				means[c][j] *= scale
			}
		}
		f := features(means, tc.per, nil)
		f.Readout = flat(means, 0.7)
		rep, err := Collapse(f)
		if err != nil {
			t.Fatal(err)
		}
		// Round-off: a class mean of `per` equal values, a global mean of N
		// values and norms and cosines over d terms each carry a relative
		// error of at most (N + d)·ε (the γ_n bound for sums of n terms,
		// Higham, Accuracy and Stability of Numerical Algorithms, §3.1).
		// The measures are at most quadratic in such errors or linear with
		// coefficients of order one, so 10·(N + d)·ε bounds them; NC1 is
		// quadratic in the within-class spread, far below.
		tol := 10 * float64(f.Rows+tc.d) * eps
		for name, v := range map[string]float64{"NC1": rep.NC1, "NC2Norm": rep.NC2Norm, "NC2Angle": rep.NC2Angle, "NC2AngleStd": rep.NC2AngleStd, "ReadoutNorm": rep.ReadoutNorm, "NC3": rep.NC3} {
			if !(math.Abs(v) <= tol) {
				t.Errorf("C=%d d=%d: %s = %g, want 0 within %g", tc.C, tc.d, name, v, tol)
			}
		}
		if rep.NC4 != 1 { // exact: every row sits on its own centre
			t.Errorf("C=%d: NC4 = %v, want 1", tc.C, rep.NC4)
		}
		if rep.BetweenRank != tc.C-1 { // the simplex spans C−1 dimensions
			t.Errorf("C=%d: rank of Σ_B = %d, want %d", tc.C, rep.BetweenRank, tc.C-1)
		}
	}
}

// 2-D simplex of 3 unit means at 90°, 210°, 330°, two rows per class at
// μ_c ± ε·u_c with unit u_c. Worked by hand: the class means are the μ_c,
// μ_G = 0, Σ_W = (1/6)·Σ_c 2ε² u_c u_cᵀ, and three unit vectors 120° apart
// form a tight frame, Σ_c μ_c μ_cᵀ = (3/2)·I, so Σ_B = I/2, Σ_B⁺ = 2I and
// NC1 = (1/3)·Tr(Σ_W·2I) = (1/3)·2·(1/6)·2ε²·3 = 2ε²/3, whatever the u_c.
// The means are untouched, so NC2 and NC3 (readout = means) stay 0.
func TestCollapseWithinClassSpread(t *testing.T) {
	means := [][]float64{{0, 1}, {-math.Sqrt(3) / 2, -0.5}, {math.Sqrt(3) / 2, -0.5}}
	rng := rand.New(rand.NewPCG(2, 2))
	const e = 0.1
	u := make([][]float64, 3)
	for c := range u {
		a := rng.Float64() * 2 * math.Pi
		u[c] = []float64{math.Cos(a), math.Sin(a)}
	}
	f := features(means, 2, func(c, r int) []float64 {
		s := e
		if r == 1 {
			s = -e
		}
		return []float64{s * u[c][0], s * u[c][1]}
	})
	f.Readout = flat(means, 1)
	rep, err := Collapse(f)
	if err != nil {
		t.Fatal(err)
	}
	want := 2 * e * e / 3
	// Round-off only, on terms of order one over six rows: 100·ε relative.
	if math.Abs(rep.NC1-want) > 100*eps*want {
		t.Errorf("NC1 = %.17g, want 2ε²/3 = %.17g", rep.NC1, want)
	}
	for name, v := range map[string]float64{"NC2Norm": rep.NC2Norm, "NC2Angle": rep.NC2Angle, "NC3": rep.NC3} {
		if math.Abs(v) > 100*eps {
			t.Errorf("%s = %g, want 0", name, v)
		}
	}
	// ε = 0.1 is far inside the Voronoi cells (distance from μ_c to the
	// cell boundary is sin 60° ≈ 0.87), so readout and nearest centre agree.
	if rep.NC4 != 1 {
		t.Errorf("NC4 = %v, want 1", rep.NC4)
	}
}

// The same 2-D frame with class 0's mean stretched by 1 + a, a = 3/2, one
// row per class. Worked by hand: μ_G = (a/3)·m_0 = m_0/2; centred means
// 2·m_0 = (0, 2) and (∓√3/2, −1), norms 2, √7/2, √7/2; cosines
// (0,1) and (0,2): −2/√7, (1,2): (−3/4 + 1)/(7/4) = 1/7.
func TestCollapseUnequalMeans(t *testing.T) {
	s3 := math.Sqrt(3)
	means := [][]float64{{0, 2.5}, {-s3 / 2, -0.5}, {s3 / 2, -0.5}}
	f := features(means, 1, nil)
	rep, err := Collapse(f)
	if err != nil {
		t.Fatal(err)
	}
	r7 := math.Sqrt(7)
	norms := []float64{2, r7 / 2, r7 / 2}
	mu := (norms[0] + norms[1] + norms[2]) / 3
	ms := (norms[0]*norms[0] + norms[1]*norms[1] + norms[2]*norms[2]) / 3 // = 5/2
	wantNorm := math.Sqrt(ms-mu*mu) / mu
	cos := []float64{-2 / r7, -2 / r7, 1.0 / 7}
	wantAngle := (math.Abs(cos[0]+0.5) + math.Abs(cos[1]+0.5) + math.Abs(cos[2]+0.5)) / 3
	cm := (cos[0] + cos[1] + cos[2]) / 3
	wantStd := math.Sqrt(((cos[0]-cm)*(cos[0]-cm) + (cos[1]-cm)*(cos[1]-cm) + (cos[2]-cm)*(cos[2]-cm)) / 3)
	// Values of order one from a few dozen operations: 1e3·ε absolute.
	tol := 1e3 * eps
	for _, c := range []struct {
		name      string
		got, want float64
	}{{"NC2Norm", rep.NC2Norm, wantNorm}, {"NC2Angle", rep.NC2Angle, wantAngle}, {"NC2AngleStd", rep.NC2AngleStd, wantStd}, {"NC1", rep.NC1, 0}} {
		if math.Abs(c.got-c.want) > tol {
			t.Errorf("%s = %.17g, want %.17g", c.name, c.got, c.want)
		}
	}
	if !math.IsNaN(rep.NC3) {
		t.Errorf("NC3 = %v without a readout, want NaN", rep.NC3)
	}
}

// Readout rows = the 2-D frame rotated by θ. Worked by hand: with R the
// rotation, ‖M(R − I)ᵀ‖²_F = Tr((R − I)MᵀM(R − I)ᵀ) = (3/2)‖R − I‖²_F =
// (3/2)·4(1 − cos θ) and ‖M‖²_F = 3, so NC3 = √(2(1 − cos θ)) = 2 sin(θ/2).
// Row c of the readout points at φ_c + θ; the network picks the class whose
// row is nearest in angle to the feature's φ_c', which is c' itself for
// |θ| < 60° and a neighbour for 60° < θ < 180°: NC4 = 1 at 30°, 0 at 90°.
func TestCollapseRotatedReadout(t *testing.T) {
	means := [][]float64{{0, 1}, {-math.Sqrt(3) / 2, -0.5}, {math.Sqrt(3) / 2, -0.5}}
	for _, tc := range []struct {
		deg float64
		nc4 float64
	}{{30, 1}, {90, 0}, {150, 0}} {
		th := tc.deg * math.Pi / 180
		var ro []float64
		for _, m := range means {
			ro = append(ro, math.Cos(th)*m[0]-math.Sin(th)*m[1], math.Sin(th)*m[0]+math.Cos(th)*m[1])
		}
		f := features(means, 2, nil)
		f.Readout = ro
		rep, err := Collapse(f)
		if err != nil {
			t.Fatal(err)
		}
		want := 2 * math.Sin(th/2)
		if math.Abs(rep.NC3-want) > 100*eps { // order-one values, a dozen terms
			t.Errorf("θ=%v°: NC3 = %.17g, want 2 sin(θ/2) = %.17g", tc.deg, rep.NC3, want)
		}
		if rep.NC4 != tc.nc4 {
			t.Errorf("θ=%v°: NC4 = %v, want %v", tc.deg, rep.NC4, tc.nc4)
		}
	}
}

// NC1 from the d×d covariances, as the definition reads, with the
// pseudo-inverse from gonum's full SVD of Σ_B (gonum as reference), on
// features with no structure.
func TestCollapseNC1AgainstCovariances(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 3))
	const C, d, per = 4, 6, 9
	N := C * per
	f := Features{Rows: N, Width: d, Classes: C}
	for n := range N {
		c := n % C
		for j := range d {
			f.H = append(f.H, rng.NormFloat64()+float64(c*j%3))
		}
		f.Labels = append(f.Labels, c)
	}
	rep, err := Collapse(f)
	if err != nil {
		t.Fatal(err)
	}
	H := mat.NewDense(N, d, f.H)
	mu := mat.NewDense(C, d, nil)
	muG := make([]float64, d)
	for n := range N {
		for j := range d {
			mu.Set(f.Labels[n], j, mu.At(f.Labels[n], j)+H.At(n, j)/per)
			muG[j] += H.At(n, j) / float64(N)
		}
	}
	sw := mat.NewSymDense(d, nil)
	sb := mat.NewSymDense(d, nil)
	for n := range N {
		r := make([]float64, d)
		for j := range d {
			r[j] = H.At(n, j) - mu.At(f.Labels[n], j)
		}
		sw.SymRankOne(sw, 1/float64(N), mat.NewVecDense(d, r))
	}
	for c := range C {
		r := make([]float64, d)
		for j := range d {
			r[j] = mu.At(c, j) - muG[j]
		}
		sb.SymRankOne(sb, 1/float64(C), mat.NewVecDense(d, r))
	}
	var svd mat.SVD
	if !svd.Factorize(sb, mat.SVDFull) {
		t.Fatal("SVD failed")
	}
	s := svd.Values(nil)
	var u, v mat.Dense
	svd.UTo(&u)
	svd.VTo(&v)
	pinv := mat.NewDense(d, d, nil)
	rank := 0
	for i, si := range s {
		if si > float64(d)*eps*s[0] {
			rank++
			var o mat.Dense
			o.Outer(1/si, v.ColView(i), u.ColView(i))
			pinv.Add(pinv, &o)
		}
	}
	var prod mat.Dense
	prod.Mul(sw, pinv)
	want := mat.Trace(&prod) / C
	if rank != C-1 {
		t.Fatalf("reference rank %d, want %d", rank, C-1)
	}
	// Both are backward-stable computations of the same quantity; the
	// error is about κ(Σ_B on its range)·d·ε relative, with κ = s_0/s_{C−2}.
	kappa := s[0] / s[C-2]
	if tol := 100 * kappa * d * eps * want; math.Abs(rep.NC1-want) > tol {
		t.Errorf("NC1 = %.17g, covariance formula %.17g (tol %g)", rep.NC1, want, tol)
	}
}

// A binary readout of one row w is read as the class scores (−w, +w).
// With means ∓u and w = 3u, that is the centred means up to scale: NC3 = 0
// (the definition of Papyan, Han and Donoho with C = 2).
func TestCollapseBinaryReadout(t *testing.T) {
	u := []float64{0.6, 0.8, 0}
	means := [][]float64{{-0.6, -0.8, 0}, u}
	f := features(means, 3, nil)
	f.Readout = []float64{1.8, 2.4, 0}
	rep, err := Collapse(f)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(rep.NC3) > 100*eps || rep.NC4 != 1 {
		t.Errorf("NC3 = %g, NC4 = %v; want 0 and 1", rep.NC3, rep.NC4)
	}
	if math.Abs(rep.NC2Angle) > 100*eps { // two centred means are antipodal: cos = −1 = −1/(C−1)
		t.Errorf("NC2Angle = %g, want 0", rep.NC2Angle)
	}
}

func TestCollapseErrors(t *testing.T) {
	f := features([][]float64{{1, 0}, {0, 1}, {1, 1}}, 2, nil)
	f.Labels[4], f.Labels[5] = 0, 1 // class 2 has no rows
	if _, err := Collapse(f); !errors.Is(err, ErrEmptyClass) {
		t.Errorf("empty class: err = %v, want ErrEmptyClass", err)
	}
	f = features([][]float64{{1, 0}, {0, 1}}, 2, nil)
	f.Readout = []float64{1, 2, 3}
	if _, err := Collapse(f); err == nil {
		t.Error("a readout of 3 values for 2×2 was accepted")
	}
}

// One-hot features through a real network: hidden W = I on one-hot inputs
// e_c, then ReLU, so h = e_c. Class means e_c, global mean 1/3, centred
// means e_c − 1/3: a simplex ETF (Papyan, Han, Donoho: NC1 = NC2 = 0).
// With the bias-free readout W = I the readout keeps the global mean's
// direction, which NC3 measures; worked by hand with J the all-ones matrix:
// W/‖W‖ = I/√3 and M/‖M‖ = (I − J/3)/√2, whose difference has diagonal
// 1/√3 − 1/√2 + 1/(3√2) and off-diagonal 1/(3√2). With W = I − J/3 it is 0.
func TestCollapseOfNetwork(t *testing.T) {
	n, err := net.NewBuilder[float64](3).Dense("hidden", 3).ReLU("relu").Readout("out", 3).Build()
	if err != nil {
		t.Fatal(err)
	}
	set := &data.Set[float64]{Rows: 6, Features: 3, Outputs: 3}
	for r := range 6 {
		c := r % 3
		for j := range 3 {
			v := 0.0
			if j == c {
				v = 1
			}
			set.X = append(set.X, v)
			set.Y = append(set.Y, v)
		}
	}
	copy(n.Dense()[0].W.Value, []float64{1, 0, 0, 0, 1, 0, 0, 0, 1})
	copy(n.Dense()[1].W.Value, []float64{1, 0, 0, 0, 1, 0, 0, 0, 1})
	rep, err := CollapseOf[float64](n, set, "")
	if err != nil {
		t.Fatal(err)
	}
	dg := 1/math.Sqrt(3) - 1/math.Sqrt(2) + 1/(3*math.Sqrt(2))
	off := 1 / (3 * math.Sqrt(2))
	want := math.Sqrt(3*dg*dg + 6*off*off)
	if math.Abs(rep.NC3-want) > 100*eps || math.Abs(rep.NC1) > 100*eps || math.Abs(rep.NC2Norm) > 100*eps || math.Abs(rep.NC2Angle) > 100*eps {
		t.Errorf("W = I: NC1 %g NC2 %g/%g NC3 %.17g; want 0, 0, 0, %.17g", rep.NC1, rep.NC2Norm, rep.NC2Angle, rep.NC3, want)
	}
	if rep.NC4 != 1 {
		t.Errorf("NC4 = %v, want 1", rep.NC4)
	}
	third := 1.0 / 3
	copy(n.Dense()[1].W.Value, []float64{1 - third, -third, -third, -third, 1 - third, -third, -third, -third, 1 - third})
	if rep, err = CollapseOf[float64](n, set, "relu"); err != nil {
		t.Fatal(err)
	}
	if math.Abs(rep.NC3) > 100*eps || rep.NC4 != 1 {
		t.Errorf("W = I − J/3: NC3 = %g, NC4 = %v; want 0 and 1", rep.NC3, rep.NC4)
	}
	// Features before the ReLU are the same here; the readout does not act
	// on them directly, so NC3 is not defined there.
	if rep, err = CollapseOf[float64](n, set, "hidden"); err != nil {
		t.Fatal(err)
	}
	if !math.IsNaN(rep.NC3) || rep.NC4 != 1 {
		t.Errorf("at hidden: NC3 = %v, NC4 = %v; want NaN and 1", rep.NC3, rep.NC4)
	}
	if _, err := CollapseOf[float64](n, set, "nope"); err == nil {
		t.Error("a missing node was accepted")
	}
}
