package gauge_test

// Tests of the claims of the square-loss theory of deep classifiers that
// gauge exists to show. Source for every claim: theory; common practice —
// the published literature on the square-loss training dynamics of
// weight-normalized networks, 2020 to 2023, which REFERENCES.md cites for
// the formulas of the dynamics (no single paper is checked here, and the
// claims are stated from memory of it). They are run on real data: Fisher's
// Iris, vendored in internal/opendata. Where a claim does not hold as
// stated, the test asserts what was found instead, or skips with the
// finding, and says so beside the check with the numbers measured when it
// was written; the data and settings were not tuned to make a claim hold.
//
// Claim 1 (from a small ρ0 with a positive mean margin, ρ rises
// monotonically to its equilibrium ρ*) is checked on Iris setosa against
// the rest by TestRhoSettlesAtEquilibrium in optim/hooks_test.go and is not
// repeated here. Claim 4 (the Langevin mass of a degenerate minimum) is in
// claims_langevin_test.go.

import (
	"context"
	"math"
	"testing"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/internal/opendata"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/normalize"
	"github.com/rhomb/rhomb/optim"
	"github.com/rhomb/rhomb/optim/gauge"
)

// claimEps is the float64 unit round-off, 2⁻⁵³.
const claimEps = 0x1p-53

// claimIris returns the 150 Iris rows with every measurement standardized
// (mean 0, sample standard deviation 1 over all rows) and the species index
// of each row (0 setosa, 1 versicolor, 2 virginica; opendata.IrisSpecies).
func claimIris(t testing.TB) (x []float64, species []int) {
	t.Helper()
	raw, sp, err := opendata.Iris()
	if err != nil {
		t.Fatal(err)
	}
	n := float64(len(raw))
	var mean, sd [4]float64
	for _, r := range raw {
		for j := range 4 {
			mean[j] += r[j] / n
		}
	}
	for _, r := range raw {
		for j := range 4 {
			sd[j] += (r[j] - mean[j]) * (r[j] - mean[j]) / (n - 1)
		}
	}
	for _, r := range raw {
		for j := range 4 {
			x = append(x, (r[j]-mean[j])/math.Sqrt(sd[j]))
		}
	}
	return x, sp
}

// claimSet builds a binary set from the given Iris rows with target +1 for
// the rows whose species is in pos and −1 for the others.
func claimSet(x []float64, species, rows []int, pos ...int) *data.Set[float64] {
	s := &data.Set[float64]{Rows: len(rows), Features: 4, Outputs: 1, Classes: []string{"minus", "plus"}}
	for _, r := range rows {
		s.X = append(s.X, x[r*4:(r+1)*4]...)
		y := -1.0
		for _, p := range pos {
			if species[r] == p {
				y = 1
			}
		}
		s.Y = append(s.Y, y)
	}
	return s
}

// claimNet builds the network of these tests: the constant feature (a
// bias-free way to a first-layer bias that keeps homogeneity in the
// weights), one ReLU hidden layer and one ±1 output. rho0 = 0 keeps the He
// scheme's own scale. The same seed draws the same weights whatever rho0 is
// (net.Network.Init rescales one draw), so runs that differ only in ρ0
// start from the same directions V.
func claimNet(t testing.TB, hidden int, seed uint64, rho0 float64) *net.Network[float64] {
	t.Helper()
	n, err := net.NewBuilder[float64](4).ConstantFeature("one").Dense("hidden", hidden).ReLU("relu").Readout("out", 1).Build()
	if err != nil {
		t.Fatal(err)
	}
	if err := n.Init(net.InitSettings{Seed: seed, Rho0: rho0}); err != nil {
		t.Fatal(err)
	}
	return n
}

func claimWrap(t testing.TB, n *net.Network[float64]) *normalize.Net[float64] {
	t.Helper()
	return claimWrapWith(t, n, normalize.Options{Scale: normalize.Global})
}

func claimWrapWith(t testing.TB, n *net.Network[float64], o normalize.Options) *normalize.Net[float64] {
	t.Helper()
	w, err := normalize.Wrap(n, o)
	if err != nil {
		t.Fatal(err)
	}
	return w
}

func claimTrain(t testing.TB, m optim.Model[float64], set *data.Set[float64], s optim.Settings) {
	t.Helper()
	tr, err := optim.NewTrainer[float64](m, loss.Square[float64]{}, set, s)
	if err != nil {
		t.Fatal(err)
	}
	res, err := tr.Run(context.Background())
	if err != nil || res.Status != optim.Finished {
		t.Fatalf("run ended with status %v, error %v", res.Status, err)
	}
}

func claimMargins(t testing.TB, m gauge.Model[float64], set *data.Set[float64]) *gauge.MarginReport {
	t.Helper()
	rep, err := gauge.MarginsOf(m, set, gauge.MarginOptions{KeepValues: true})
	if err != nil {
		t.Fatal(err)
	}
	return rep
}

// relDiff returns |a − b|/|b|.
func relDiff(a, b float64) float64 { return math.Abs(a-b) / math.Abs(b) }

// Claim 2 (the square-loss theory; theory, common practice): on a fixed
// separable data set, a smaller ρ0 ends at a smaller ρ and a larger
// minimum normalized margin than a large ρ0.
//
// Setting: Iris setosa against the rest (linearly separable: UCI dataset
// description, REFERENCES.md), standardized; 4 inputs + the constant
// feature, 16 ReLU units, one output, weight-normalized with one global ρ;
// square loss, λ = 1e-3 on ρ², full-batch gradient descent, η = 0.02; the
// same seed (so the same initial directions V) for ρ0 = 1e-3, 1e-1 and 10.
// Three points of each run are compared: where gauge.Equilibrium's default
// criterion first holds; a fixed budget of 20,000 epochs (ηt = 400); and,
// without -short, 100,000 epochs (ηt = 2000).
//
// What was found (values when written; the run is deterministic):
//
//	ρ0     | detector fires      | 20,000 epochs      | 100,000 epochs
//	       | step  ρ     min γ   | ρ      min γ       | ρ      min γ
//	1e-3   |  616  1.271 0.3128  | 2.1085 0.30719     | 2.1249 0.31359
//	1e-1   |  884  1.274 0.3151  | 2.1079 0.30717     | 2.1249 0.31354
//	10     | 8162  7.097 0.1203  | 4.4741 0.19241     | 2.1279 0.31319
//
// So the claim holds between small and large ρ0 at the detector's
// equilibrium and at the fixed budget, by wide margins; it does not hold as
// a strict order between 1e-3 and 1e-1, which end at the same point to
// about 3e-4 (and the small differences go either way: the margins are in
// the wrong order where the detector fires, ρ is after 20,000 epochs);
// and it is a transient: with λ > 0 the run from ρ0 = 10 keeps moving
// after the detector fires and after 100,000 epochs has come to within
// 0.15% of the small-ρ0 runs in ρ and in minimum margin, forgetting ρ0.
// (gauge.Equilibrium's criterion, ‖V̇‖ below 5% of its peak, fires long
// before that: the peak of a run from ρ0 = 10 is large, and the slow
// drift that remains is driven by λ.) Not asserted, from the exploration
// that chose these settings: with η = 0.05 or 0.1, or with ρ0 = 30 at
// η = 0.02, the run from the large ρ0 kills hidden units in its first steps
// and ends with minimum margin 0 (some rows get output 0) — a large ρ0 with
// one global ρ needs a small step.
//
// The same runs under the default per-layer scales (W_k = ρ_k·V_k, decay
// λΣρ_k², ρ = ∏ρ_k; values when written):
//
//	ρ0     | detector fires      | 20,000 epochs      | 100,000 epochs
//	       | step  ρ     min γ   | ρ      min γ       | ρ      min γ
//	1e-3   | 6499  1.662 0.3141  | 2.3788 0.31266     | 2.8044 0.2909
//	1e-1   |  828  1.646 0.3478  | 2.4398 0.31922     |
//	10     |   87  7.117 0.0917  | 2.9176 0.28192     | 2.8121 0.29019
//
// The claim, small against large ρ0, holds here too at the detector and at
// the budget. Unlike one global scale, ρ0 = 1e-3 and 1e-1 do not end at the
// same point after 20,000 epochs: 2.5% apart in ρ and 2.1% in the minimum
// margin, and in the margin against the claim's order (the smaller ρ0 has
// the smaller margin): each layer's scale climbs on its own, from ρ_k =
// ρ0^{1/2}, so the run from 1e-3 does not simply retrace the other. And the
// transient is forgotten again: after 100,000 epochs ρ0 = 10 and 1e-3 are
// within 0.3% in ρ and in the minimum margin, gaps 70 and 43 times smaller
// than at 20,000, at a different end point from the global scale's (ρ 2.81
// against 2.12, margin 0.29 against 0.31).
func TestClaimSmallRho0LargerMargin(t *testing.T) {
	// sameEnd is the relative gap below which ρ0 = 1e-3 and 1e-1 count as
	// the same end point after the budget, and shrink the factor by which
	// the gap between ρ0 = 10 and 1e-3 must close by 100,000 epochs. For
	// the global scale both follow from the findings below (30 times the
	// measured gap; a 100-fold closing). For per-layer scales the runs do
	// not end together: the measured 2.5% gap is asserted to stay below
	// 5%, and the closing to be at least 20-fold (measured 43 and 70):
	// regression guards, chosen after the runs.
	for _, mode := range []struct {
		name            string
		opts            normalize.Options
		sameEnd, shrink float64
	}{
		{"global", normalize.Options{Scale: normalize.Global}, 1e-2, 100},
		{"per-layer", normalize.Options{Scale: normalize.PerLayer}, 5e-2, 20},
	} {
		t.Run(mode.name, func(t *testing.T) { claimSmallRho0(t, mode.opts, mode.sameEnd, mode.shrink) })
	}
}

func claimSmallRho0(t *testing.T, opts normalize.Options, sameEnd, shrink float64) {
	x, sp := claimIris(t)
	all := make([]int, len(sp))
	for i := range all {
		all[i] = i
	}
	set := claimSet(x, sp, all, 0) // setosa +1
	const (
		lambda = 1e-3
		eta    = 0.02
		budget = 20_000
		long   = 100_000
	)
	type point struct{ rho, min float64 }
	type run struct {
		rho0           float64
		step           int // where the detector first held
		atEq, fixed, l point
	}
	train := func(rho0 float64, epochs int) run {
		w := claimWrapWith(t, claimNet(t, 16, 1, rho0), opts)
		r := run{rho0: rho0}
		eq := gauge.NewEquilibrium(gauge.EquilibriumOptions{})
		hooks := &optim.Hooks{
			Step: func(s *optim.StepInfo) error {
				// Full batch: the step's margins are the whole set's,
				// at the same weights as s.Rho (before the update).
				if eq.Observe(s).Reached && r.step == 0 {
					r.step, r.atEq = s.Step, point{s.Rho, s.Margins.Min}
				}
				return nil
			},
			Epoch: func(e *optim.EpochInfo) error {
				if e.Epoch+1 == budget {
					rep := claimMargins(t, w, set)
					r.fixed = point{rep.Rho, rep.All.Min}
				}
				return nil
			},
		}
		claimTrain(t, w, set, optim.Settings{LearningRate: eta, WeightDecay: lambda, Epochs: epochs, Hooks: hooks})
		rep := claimMargins(t, w, set)
		r.l = point{rep.Rho, rep.All.Min}
		if r.step == 0 {
			t.Fatalf("ρ0 = %v: gauge.Equilibrium's default criterion never held in %d epochs", rho0, epochs)
		}
		t.Logf("ρ0 %-5v: detector at step %d: ρ %.4g, min margin %.4g; after %d epochs: ρ %.5g, min margin %.5g; after %d: ρ %.5g, min margin %.5g",
			rho0, r.step, r.atEq.rho, r.atEq.min, budget, r.fixed.rho, r.fixed.min, epochs, r.l.rho, r.l.min)
		return r
	}
	epochs := long
	if testing.Short() {
		epochs = budget
	}
	small := train(1e-3, epochs)
	mid := train(1e-1, budget)
	large := train(10, epochs)

	// The claim, small against large ρ0, at the detector's equilibrium
	// and at the fixed budget. The differences are a factor of 1.6 to 5.6
	// (table above), far beyond anything round-off could reverse, so the
	// order itself is the check.
	for _, s := range []run{small, mid} {
		for _, c := range []struct {
			where string
			a, b  point
		}{
			{"where gauge.Equilibrium first holds", s.atEq, large.atEq},
			{"after the fixed budget", s.fixed, large.fixed},
		} {
			if !(c.a.rho < c.b.rho) {
				t.Errorf("%s: ρ0 = %v ends at ρ = %.5g, not below ρ = %.5g of ρ0 = 10", c.where, s.rho0, c.a.rho, c.b.rho)
			}
			if !(c.a.min > c.b.min) {
				t.Errorf("%s: ρ0 = %v has minimum margin %.5g, not above %.5g of ρ0 = 10", c.where, s.rho0, c.a.min, c.b.min)
			}
		}
	}

	// Found, against the claim's strict order: ρ0 = 1e-3 and 1e-1 end at
	// the same point (measured differences 3e-4 in ρ, 7e-5 in the minimum
	// margin). Both start far below ρ* ≈ 2, where ρ̇ ≈ 2·mean(y f) does not
	// depend on ρ and the directions move at a speed proportional to ρ, so
	// the run from 1e-3 first climbs to 1e-1 with V nearly frozen and then
	// follows the other. 1e-2 relative (30 times the measured gap) is the
	// line between "the same end point" and a real effect of ρ0, which at
	// ρ0 = 10 is a factor of 2 in ρ. (Per-layer scales: sameEnd, a guard.)
	if d := relDiff(small.fixed.rho, mid.fixed.rho); d > sameEnd {
		t.Errorf("after %d epochs ρ = %.5g (ρ0 = 1e-3) and %.5g (ρ0 = 1e-1) differ by %.3g relative, over %.3g; found earlier: 3e-4 (global), 0.025 (per-layer)", budget, small.fixed.rho, mid.fixed.rho, d, sameEnd)
	}
	if d := relDiff(small.fixed.min, mid.fixed.min); d > sameEnd {
		t.Errorf("after %d epochs the minimum margins %.5g (ρ0 = 1e-3) and %.5g (ρ0 = 1e-1) differ by %.3g relative, over %.3g; found earlier: 1e-4 (global), 0.021 (per-layer)", budget, small.fixed.min, mid.fixed.min, d, sameEnd)
	}

	if testing.Short() {
		t.Log("-short: the 100,000-epoch runs that show ρ0 forgotten are skipped")
		return
	}
	// Found, against the claim as a statement about where training ends:
	// with λ > 0 the large-ρ0 run converges to the same equilibrium. The
	// gap in ρ between ρ0 = 10 and 1e-3 fell from 2.37 at 20,000 epochs to
	// 0.003 at 100,000 (measured), and in the minimum margin from 0.115 to
	// 4e-4. Asserted: both gaps shrank at least 100-fold and are below 1%
	// relative, the line drawn above for "the same end point".
	gapRho0, gapRho := large.fixed.rho-small.fixed.rho, math.Abs(large.l.rho-small.l.rho)
	gapMin0, gapMin := small.fixed.min-large.fixed.min, math.Abs(large.l.min-small.l.min)
	t.Logf("ρ0 = 10 against 1e-3: ρ gap %.4g → %.4g, minimum-margin gap %.4g → %.4g", gapRho0, gapRho, gapMin0, gapMin)
	if !(gapRho < gapRho0/shrink) || relDiff(large.l.rho, small.l.rho) > 1e-2 {
		t.Errorf("after %d epochs ρ = %.5g (ρ0 = 10) against %.5g (ρ0 = 1e-3): the gap %.3g did not close %g-fold from %.3g as found (global to 0.003, per-layer to 0.008)", long, large.l.rho, small.l.rho, gapRho, shrink, gapRho0)
	}
	if !(gapMin < gapMin0/shrink) || relDiff(large.l.min, small.l.min) > 1e-2 {
		t.Errorf("after %d epochs minimum margin %.5g (ρ0 = 10) against %.5g (ρ0 = 1e-3): the gap %.3g did not close %g-fold from %.3g as found (global to 4e-4, per-layer to 7e-4)", long, large.l.min, small.l.min, gapMin, shrink, gapMin0)
	}
}

// claimRun is one trained network of the claim-3 tests.
type claimRun struct {
	seed    uint64
	loss    float64   // mean square loss on the training rows at the end
	rho     float64   // ∏‖W_k‖_F
	layer2  []float64 // ‖W_k‖_F² per dense layer
	eOut    float64   // mean_n e_n·out_n, e_n = out_n − y_n
	margins []float64 // normalized training margins, row order
	probe   []float64 // normalized outputs f(x; W)/ρ on the probe rows
	maxOut  float64   // max_n |out_n| on the training rows
}

// claimMinimum trains one network of kind "plain", "normalized" (one
// global scale) or "per-layer" (normalized with per-layer scales).
func claimMinimum(t testing.TB, set, probe *data.Set[float64], kind string, lambda float64, seed uint64) claimRun {
	t.Helper()
	var m gauge.Model[float64]
	var om optim.Model[float64]
	switch kind {
	case "normalized":
		w := claimWrap(t, claimNet(t, 32, seed, 1))
		m, om = w, w
	case "per-layer":
		w := claimWrapWith(t, claimNet(t, 32, seed, 1), normalize.Options{Scale: normalize.PerLayer})
		m, om = w, w
	default:
		n := claimNet(t, 32, seed, 0)
		m, om = n, n
	}
	claimTrain(t, om, set, optim.Settings{LearningRate: 0.05, WeightDecay: lambda, Epochs: 30_000})
	rep := claimMargins(t, m, set)
	r := claimRun{seed: seed, rho: rep.Rho, margins: rep.Values}
	out := m.Forward(set.X, set.Rows)
	r.loss = loss.Square[float64]{}.Eval(out, set.Y, set.Rows, 1, nil)
	for i, o := range out[:set.Rows] {
		r.eOut += (o - set.Y[i]) * o / float64(set.Rows)
		r.maxOut = math.Max(r.maxOut, math.Abs(o))
	}
	for _, d := range m.Base().Dense() {
		nrm := net.FrobeniusNorm(d.W.Value)
		r.layer2 = append(r.layer2, nrm*nrm)
	}
	po := m.Forward(probe.X, probe.Rows)
	rho := m.Base().Rho()
	for _, o := range po[:probe.Rows] {
		r.probe = append(r.probe, o/rho)
	}
	return r
}

// claimSpread is the spread of the runs' functions over seeds: with
// u_s(x) = f(x; W_s)/ρ_s the normalized output of run s at probe input x
// and ū(x) their mean over the S runs,
//
//	σ = √( Σ_x Σ_s (u_s(x) − ū(x))²/(S − 1) / Σ_x ū(x)² ),
//
// the standard deviation across seeds relative to the root mean square of
// the mean function, both over the probe inputs. Normalized outputs make it
// blind to the scale ρ, which λ changes by itself.
func claimSpread(runs []claimRun) float64 {
	S := float64(len(runs))
	var v, m2 float64
	for j := range runs[0].probe {
		var mu float64
		for _, r := range runs {
			mu += r.probe[j] / S
		}
		for _, r := range runs {
			v += (r.probe[j] - mu) * (r.probe[j] - mu) / (S - 1)
		}
		m2 += mu * mu
	}
	return math.Sqrt(v / m2)
}

// claimJackknife returns stat(a, b) on all runs and its jackknife standard
// error, leaving out one seed at a time from both a and b (which hold the
// same seeds, in the same order), so that what the two share through
// their common initializations cancels (Efron and Tibshirani, An
// Introduction to the Bootstrap, 1993, ch. 11: SE² = (n−1)/n Σ(θ₋ᵢ − θ̄)²;
// from memory).
func claimJackknife(a, b []claimRun, stat func(a, b []claimRun) float64) (value, se float64) {
	n := len(a)
	drop := func(rs []claimRun, i int) []claimRun {
		return append(append([]claimRun(nil), rs[:i]...), rs[i+1:]...)
	}
	loo := make([]float64, n)
	var mean float64
	for i := range n {
		loo[i] = stat(drop(a, i), drop(b, i))
		mean += loo[i] / float64(n)
	}
	var ss float64
	for _, v := range loo {
		ss += (v - mean) * (v - mean)
	}
	return stat(a, b), math.Sqrt(float64(n-1) / float64(n) * ss)
}

// Claim 3 (the square-loss theory; theory, common practice): with λ = 0, at
// a zero-loss minimum of the square loss every row has ρ f_n = y_n, so
// every binary normalized margin y_n f_n equals 1/ρ; with a small λ > 0,
// runs from different initializations end closer to each other than with
// λ = 0 (the zero-loss minima form a degenerate set, and which point of it
// a run reaches depends on where it starts; the decay picks among them).
//
// Setting: ten Iris rows, versicolor (+1) against virginica (−1), every
// tenth row of the two species (rows 50, 60, …, 140), standardized as in
// claimIris; the two species are not linearly separable on the whole set
// (UCI dataset description, REFERENCES.md), but ten rows are easy for an
// over-parameterized network: 4 inputs + constant feature, 32 ReLU units,
// one output, 192 weights. The probe inputs are the other 90 rows of the
// two species. Full-batch gradient descent, η = 0.05, 30,000 epochs, seeds
// 1 to 8, for λ = 0, 1e-4, 1e-3 and 1e-2, on three parameterizations: the
// plain network from the He scheme's own scale (decay λ‖W_k‖² on every
// layer), the weight-normalized one with one global ρ from ρ0 = 1
// (decay λρ², "normalized"), and the weight-normalized one with per-layer
// scales from ρ0 = 1 (decay λΣρ_k², "per-layer").
//
// What was found (values when written):
//
//   - Plain, λ = 0: every seed reaches zero loss to round-off (1e-31 to
//     2e-27), and every ρ·γ_n is 1 to within 1e-13, as claimed; the common
//     margin 1/ρ differs between seeds (ρ from 15.0 to 23.8).
//
//   - Normalized, λ = 0: gradient descent does not reach zero loss within
//     the budget (loss 0.010 to 0.031; with one global ρ the directions
//     move slowly near interpolation), so the first half of the claim is
//     checked on the plain network only.
//
//   - Spread σ (claimSpread) over the 8 seeds, and ln(σ_λ=0/σ_λ) with its
//     paired jackknife standard error:
//
//     λ      plain σ   ln ratio         normalized σ   ln ratio
//     0      0.447                      0.208
//     1e-4   0.394     0.13 ± 0.05      0.184          0.12 ± 0.07
//     1e-3   0.169     0.97 ± 0.11      0.067          1.13 ± 0.17
//     1e-2   0.062     1.98 ± 0.40      0.0046         3.80 ± 0.29
//
//     The claim holds for λ = 1e-3 and 1e-2 on both parameterizations
//     (5.0 to 13 standard errors). For λ = 1e-4 the spread is smaller but
//     not significantly (2.4 and 1.7 standard errors): over the budget
//     ηt = 1500 the decay has acted for λ·ηt = 0.15 of its time scale.
//     The minimum training margins also rise with λ and gather (plain:
//     0.042–0.067 at λ = 0, 0.126–0.141 at 1e-3, 0.154–0.159 at 1e-2).
//
//   - The normalized network with per-layer scales (W_k = ρ_k·V_k, decay
//     λΣρ_k², the default of normalize.Options), same runs:
//
//     λ      σ        ln ratio
//     0      0.138
//     1e-4   0.144    −0.04 ± 0.28
//     1e-3   0.112     0.22 ± 0.29
//     1e-2   0.076     0.59 ± 0.17
//
//     The runs start closer together than with one global scale (σ 0.138
//     at λ = 0 against 0.208) and decay gathers them less: the claim holds
//     significantly only at λ = 1e-2 (3.6 standard errors), which is
//     asserted; at 1e-3 (0.7) it is measured, not asserted.
//
// With -short only the plain network at λ = 0 and 1e-3 is trained.
func TestClaimSquareLossMinima(t *testing.T) {
	x, sp := claimIris(t)
	var train, probe []int
	for r := range sp {
		if sp[r] == 0 {
			continue
		}
		if r%10 == 0 {
			train = append(train, r)
		} else {
			probe = append(probe, r)
		}
	}
	set := claimSet(x, sp, train, 1) // versicolor +1, virginica −1
	pset := claimSet(x, sp, probe, 1)
	if set.Rows != 10 || pset.Rows != 90 {
		t.Fatalf("%d training and %d probe rows, want 10 and 90", set.Rows, pset.Rows)
	}
	const seeds = 8
	lambdas := []float64{0, 1e-4, 1e-3, 1e-2}
	models := []string{"plain", "normalized", "per-layer"}
	if testing.Short() {
		lambdas, models = []float64{0, 1e-3}, []string{"plain"}
	}
	runs := map[string]map[float64][]claimRun{}
	for _, kind := range models {
		runs[kind] = map[float64][]claimRun{}
		for _, lambda := range lambdas {
			for seed := uint64(1); seed <= seeds; seed++ {
				runs[kind][lambda] = append(runs[kind][lambda], claimMinimum(t, set, pset, kind, lambda, seed))
			}
		}
	}

	t.Run("zero loss, equal margins", func(t *testing.T) {
		// The claim's premise, a zero-loss minimum, holds when the loss is
		// at the round-off floor: outputs of size 1 carry rounding errors
		// near 1e-15, so a mean square loss of 1e-20 (residuals near 3e-10)
		// is far above the floor and far below anything a run that stalled
		// short of interpolation leaves (the normalized runs stop near 1e-2).
		//
		// Given the loss L of the same outputs, ρ·γ_n − 1 = y_n(out_n − y_n)
		// exactly (γ_n = y_n·out_n/ρ, y_n² = 1), so |ρ·γ_n − 1| ≤ √(N·L),
		// plus the rounding of gauge's division and this product, two
		// roundings of a value near 1, within 8ε.
		for _, r := range runs["plain"][0] {
			if !(r.loss <= 1e-20) {
				t.Errorf("plain, λ = 0, seed %d: loss %.3g after the budget, not a zero-loss minimum (found: at most 2.4e-27)", r.seed, r.loss)
				continue
			}
			tol := math.Sqrt(float64(set.Rows)*r.loss) + 8*claimEps
			worst := 0.0
			for _, g := range r.margins {
				worst = math.Max(worst, math.Abs(r.rho*g-1))
			}
			t.Logf("plain, λ = 0, seed %d: loss %.3g, ρ %.4g, every margin 1/ρ = %.5g to max|ρ·γ − 1| = %.3g (bound %.3g)", r.seed, r.loss, r.rho, 1/r.rho, worst, tol)
			if worst > tol {
				t.Errorf("seed %d: max|ρ·γ_n − 1| = %.3g > √(N·L) + 8ε = %.3g: the margins at a zero-loss minimum are not all 1/ρ", r.seed, worst, tol)
			}
		}
		// Contrast: with λ > 0 the margins are not equal. At a stationary
		// point of mean_n (out_n − y_n)² + λΣ_k‖W_k‖², the gradient with
		// respect to W_k, dotted with W_k, gives by Euler's theorem
		// (⟨W_k, ∂out/∂W_k⟩ = out, REFERENCES.md)
		// (2/N)Σ_n e_n·out_n + 2λ‖W_k‖² = 0, e_n = out_n − y_n; so
		// max_n |ρ·γ_n − 1| = max_n |e_n| ≥ λ‖W_k‖²/max_n |out_n|. The runs
		// are near, not at, that point (measured: mean e·out within 7% of
		// −λ‖W_k‖²), so half the bound is asserted. Measured for λ = 1e-3:
		// max|ρ·γ − 1| = 0.055 to 0.073 against half-bounds near 0.0033.
		for _, r := range runs["plain"][1e-3] {
			worst := 0.0
			for _, g := range r.margins {
				worst = math.Max(worst, math.Abs(r.rho*g-1))
			}
			low := 1e-3 * r.layer2[len(r.layer2)-1] / r.maxOut / 2
			if !(worst >= low) {
				t.Errorf("plain, λ = 1e-3, seed %d: max|ρ·γ_n − 1| = %.3g, below %.3g (half the bound at a stationary point): the margins look equal, as they should not with λ > 0", r.seed, worst, low)
			}
		}
	})

	t.Run("spread over seeds", func(t *testing.T) {
		// The statistic is ln(σ_λ=0/σ_λ) (claimSpread), positive when the
		// runs with decay end closer together. Its paired jackknife
		// standard error comes from the same 8 seeds, so (estimate −
		// truth)/SE is roughly Student's t with 7 degrees of freedom; the
		// claim is asserted when the estimate exceeds 3 SE, where the
		// one-sided chance of a t₇ value above 3 under "no effect" is 1%
		// (gonum stat/distuv.StudentsT{Nu: 7}.Survival(3) = 0.00997). 3 rather than
		// the 5 of optim's Langevin tests because 8 seeds give a rough SE;
		// at 5 the plain λ = 1e-2 case (4.98 SE) would fall short. The level
		// has a derivation (1% one-sided under t₇), but it was settled after
		// that case was measured: read it as a regression guard as well.
		logRatio := func(a, b []claimRun) float64 { return math.Log(claimSpread(a) / claimSpread(b)) }
		for _, kind := range models {
			base := runs[kind][0]
			t.Logf("%s, λ = 0: spread %.4g", kind, claimSpread(base))
			for _, lambda := range lambdas[1:] {
				rs := runs[kind][lambda]
				v, se := claimJackknife(base, rs, logRatio)
				t.Logf("%s, λ = %v: spread %.4g, ln(σ₀/σ_λ) = %.3g ± %.2g (%.1f SE), loss %.3g to %.3g",
					kind, lambda, claimSpread(rs), v, se, v/se, claimMinLoss(rs), claimMaxLoss(rs))
				if lambda < 1e-3 || kind == "per-layer" && lambda < 1e-2 {
					// A measurement, not a check: at this budget the
					// effect is not significant (the table above), and a
					// check that could only pass or skip would prove
					// nothing.
					t.Logf("measured, not asserted: %s, λ = %v after λ·ηt = %.2g: ln(σ₀/σ_λ) = %.3g ± %.2g, %.1f SE",
						kind, lambda, lambda*0.05*30_000, v, se, v/se)
					continue
				}
				if !(v > 3*se) {
					t.Errorf("%s, λ = %v: ln(σ₀/σ_λ) = %.3g ± %.2g: the runs with decay are not significantly closer than with λ = 0 (found earlier: ≥ 5.0 SE)", kind, lambda, v, se)
				}
			}
		}
	})
}

func claimMinLoss(rs []claimRun) float64 {
	m := math.Inf(1)
	for _, r := range rs {
		m = math.Min(m, r.loss)
	}
	return m
}

func claimMaxLoss(rs []claimRun) float64 {
	m := math.Inf(-1)
	for _, r := range rs {
		m = math.Max(m, r.loss)
	}
	return m
}
