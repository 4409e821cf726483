package recipe_test

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"slices"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/internal/opendata"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/optim"
	"github.com/rhomb/rhomb/optim/recipe"
)

// iris returns Fisher's Iris data (REFERENCES.md: 150 rows, 50 per
// species) as a Set with one-hot targets, each measurement standardized
// over all rows, and a stratified, seeded 80/20 split of it.
func iris(t *testing.T) (all, train, val *data.Set[float64]) {
	t.Helper()
	x, species, err := opendata.Iris()
	if err != nil {
		t.Fatal(err)
	}
	n := len(x)
	all = &data.Set[float64]{Rows: n, Features: 4, Outputs: 3, Classes: opendata.IrisSpecies,
		X: make([]float64, n*4), Y: make([]float64, n*3)}
	for j := range 4 {
		var mean, ss float64
		for _, r := range x {
			mean += r[j] / float64(n)
		}
		for _, r := range x {
			ss += (r[j] - mean) * (r[j] - mean)
		}
		sd := math.Sqrt(ss / float64(n-1))
		for i, r := range x {
			all.X[i*4+j] = (r[j] - mean) / sd
		}
	}
	for i, s := range species {
		all.Y[i*3+s] = 1
	}
	parts, err := recipe.SplitRows(all.Labels(), 0.2, 0, 1)
	if err != nil {
		t.Fatal(err)
	}
	return all, all.Subset(parts[0]), all.Subset(parts[1])
}

// TestStepSizeLeastSquares checks the measured step size where the
// curvature is known in closed form: a linear model (a constant feature
// and the readout, no normalization) with the square loss, whose
// objective (1/n)Σ(y − w·x̃)² + λ‖w‖² has the constant Hessian
// (2/n)X̃ᵀX̃ + 2λI (calculus; REFERENCES.md, "Least squares"). Its
// largest eigenvalue comes from gonum's EigenSym, and the plan's η must be
// StepFactor × 2(1 + μ)/λ_max, the heavy-ball threshold (optim.StableRate).
//
// Tolerance: the power iteration stops once two estimates differ by at
// most 10⁻³ of the latest (optim.SharpnessSettings); for a symmetric
// matrix the Rayleigh quotient's error then is at most that change times
// r²/(1 − r²), r = λ₂/λ₁ (the error shrinks by r² per step; a geometric
// series), plus rounding, far smaller.
func TestStepSizeLeastSquares(t *testing.T) {
	_, train, _ := iris(t)
	// Setosa against the rest, as ±1: one output.
	bin := &data.Set[float64]{Rows: train.Rows, Features: 4, Outputs: 1, X: train.X, Y: make([]float64, train.Rows)}
	for r := range train.Rows {
		bin.Y[r] = -1
		if train.Class(r) == 0 {
			bin.Y[r] = 1
		}
	}
	plan := recipe.Plan{Hidden: []int{}, Norm: recipe.Plain, Decay: 1e-3, Epochs: 1, Seed: 1}
	var outcome recipe.Outcome
	f, err := recipe.Fit(context.Background(), bin, nil, plan, false, nil)
	if err != nil {
		t.Fatal(err)
	}
	outcome = f.Outcome

	n := bin.Rows
	xt := mat.NewDense(n, 5, nil)
	for r := range n {
		for j := range 4 {
			xt.Set(r, j, bin.X[r*4+j])
		}
		xt.Set(r, 4, 1) // the constant feature
	}
	var h mat.SymDense
	h.SymOuterK(2/float64(n), xt.T())
	for i := range 5 {
		h.SetSym(i, i, h.At(i, i)+2*1e-3)
	}
	var eig mat.EigenSym
	if !eig.Factorize(&h, false) {
		t.Fatal("EigenSym did not converge")
	}
	ev := eig.Values(nil) // ascending
	l1, l2 := ev[4], ev[3]
	r := l2 / l1
	tol := 1e-3 * l1 * r * r / (1 - r*r)
	if d := math.Abs(outcome.Sharpness - l1); d > tol {
		t.Errorf("measured curvature %.10g, gonum's largest eigenvalue %.10g: off by %.3g > %.3g", outcome.Sharpness, l1, d, tol)
	}
	d := recipe.Defaults()
	if want := d.StepFactor * optim.StableRate(outcome.Sharpness, d.Momentum, false); outcome.Rate != want {
		t.Errorf("η = %v, want StepFactor × 2(1+μ)/λ_max = %v", outcome.Rate, want)
	}
}

// TestKeepsBestEpoch checks what the session promises for any data (Iris
// here): the kept epoch is the best of the history by the metric, then by
// the minimum normalized margin; the model ends with that epoch's weights,
// so evaluating it again gives that epoch's figures exactly (the same
// forward pass on the same weights); and a run stopped for patience ends
// exactly Patience epochs after its best.
func TestKeepsBestEpoch(t *testing.T) {
	_, train, val := iris(t)
	plan := recipe.Plan{Hidden: []int{16}, Epochs: 300, Patience: 5, Seed: 3}
	var seen []recipe.Score
	obs := &recipe.Observer{Epoch: func(r *recipe.EpochReport) error {
		seen = append(seen, r.Score)
		return nil
	}}
	f, err := recipe.Fit(context.Background(), train, val, plan, false, obs)
	if err != nil {
		t.Fatal(err)
	}
	out := f.Outcome
	if out.Stop != recipe.StopPatience {
		t.Fatalf("the run stopped with %q after %d epochs; this check needs a patience stop", out.Stop, out.Result.Epochs)
	}
	if got := out.Result.Epochs - out.Best.Epoch; got != 5 {
		t.Errorf("stopped %d epochs after the best, want the patience, 5", got)
	}
	best := seen[0]
	for _, s := range seen[1:] {
		if s.Value > best.Value || s.Value == best.Value && s.MinMargin > best.MinMargin {
			best = s
		}
	}
	if !best.Same(out.Best) {
		t.Errorf("kept %+v, the history's best is %+v", out.Best, best)
	}
	if !slices.EqualFunc(seen, out.History, recipe.Score.Same) {
		t.Error("the outcome's history differs from the scores the observer saw")
	}
	e := recipe.Evaluate(f.Model(), val)
	if e.Accuracy() != out.Best.Accuracy || e.MinMargin != out.Best.MinMargin {
		t.Errorf("the model scores accuracy %v, min margin %v; the kept epoch %d scored %v, %v",
			e.Accuracy(), e.MinMargin, out.Best.Epoch, out.Best.Accuracy, out.Best.MinMargin)
	}
}

// TestHealthOneClass builds the degenerate model by hand: a linear model
// whose only non-zero weight joins the constant feature to setosa's
// output, so that it answers setosa for every row. Iris has 50 rows of
// each species (UCI description; REFERENCES.md), so such a model is right
// on exactly a third of the rows, the majority rate, and recognizes none
// of the other two species.
func TestHealthOneClass(t *testing.T) {
	all, _, _ := iris(t)
	n, _, err := recipe.Build[float64](recipe.Plan{Hidden: []int{}, Norm: recipe.Plain}, 4, 3)
	if err != nil {
		t.Fatal(err)
	}
	w := n.Dense()[0].W // 3 × (4 + 1): the constant feature last
	clear(w.Value)
	w.Value[4] = 1
	h := recipe.Check(n, all, opendata.IrisSpecies)
	if h.OK() {
		t.Fatal("a model that answers one class passed the health check")
	}
	e := recipe.Evaluate(n, all)
	if e.Accuracy() != 50.0/150 || e.Majority() != 50.0/150 {
		t.Errorf("accuracy %v, majority %v; want 1/3 each", e.Accuracy(), e.Majority())
	}
	want := []string{`predicts class "setosa" for every one of the 150`, "no better than always answering the most frequent class"}
	for i, p := range want {
		if i >= len(h.Problems) || !contains(h.Problems[i], p) {
			t.Errorf("problem %d: want %q in %q", i, p, h.Problems)
		}
	}
	if h.Advice == "" {
		t.Error("no advice with the problems")
	}
	// A class never recognized while others are: answer versicolor for
	// setosa's rows and virginica for the rest (petal length, the third
	// measurement, separates setosa; UCI description).
	clear(w.Value)
	w.Value[1*5+2] = -1 // versicolor: short petals
	w.Value[2*5+2] = 1  // virginica: long petals
	h = recipe.Check(n, all, opendata.IrisSpecies)
	found := false
	for _, p := range h.Problems {
		found = found || contains(p, `none of the 50 validation rows of class "setosa"`)
	}
	if !found {
		t.Errorf("setosa is never recognized, yet the problems are %q", h.Problems)
	}
}

func contains(s, sub string) bool {
	for i := 0; i+len(sub) <= len(s); i++ {
		if s[i:i+len(sub)] == sub {
			return true
		}
	}
	return false
}

// TestResumeSameBits interrupts a session (the context canceled after
// three epochs), saves its state and the trainer's, restores both into a
// new session over a copy of the weights, and finishes: the parameters,
// the kept epoch and the history must equal those of a run never
// interrupted, bit for bit (a property of the saved state, for any data).
func TestResumeSameBits(t *testing.T) {
	_, train, val := iris(t)
	plan := recipe.Plan{Hidden: []int{8}, Epochs: 12, Patience: -1, Seed: 5, Temperature: 1e-6}
	newModel := func() (*recipe.Fitted[float64], *recipe.Session[float64], context.CancelFunc, context.Context) {
		n, w, err := recipe.Build[float64](plan, 4, 3)
		if err != nil {
			t.Fatal(err)
		}
		f := &recipe.Fitted[float64]{Network: n, Normalized: w, Loss: loss.Square[float64]{}}
		ctx, cancel := context.WithCancel(context.Background())
		s, err := recipe.NewSession(f.Model(), f.Loss, train, val, plan, &recipe.Observer{Epoch: func(r *recipe.EpochReport) error {
			if r.Score.Epoch == 3 {
				cancel()
			}
			return nil
		}})
		if err != nil {
			t.Fatal(err)
		}
		return f, s, cancel, ctx
	}
	whole, ws, _, _ := newModel()
	wout, err := ws.Run(context.Background())
	if err != nil {
		t.Fatal(err)
	}

	part, ps, _, ctx := newModel()
	if _, err := ps.Run(ctx); err == nil {
		t.Fatal("the canceled run returned no error")
	}
	saved, tst := ps.State(), ps.Trainer().State()
	if saved.Kept == nil {
		t.Fatal("the session state keeps no best weights after three scored epochs")
	}
	// Through JSON, as a checkpoint stores it (Kept goes into tensors).
	b, err := json.Marshal(saved)
	if err != nil {
		t.Fatal(err)
	}
	var st recipe.SessionState
	if err := json.Unmarshal(b, &st); err != nil {
		t.Fatal(err)
	}
	st.Kept = saved.Kept
	rest, rs, _, _ := newModel()
	for i, p := range rest.Model().Params() {
		copy(p.Value, part.Model().Params()[i].Value)
	}
	if err := rs.Restore(st, tst); err != nil {
		t.Fatal(err)
	}
	rout, err := rs.Run(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	for i, p := range whole.Model().Params() {
		if !slices.Equal(p.Value, rest.Model().Params()[i].Value) {
			t.Fatalf("parameter %s differs between the resumed and the uninterrupted run", p.Name)
		}
	}
	if !wout.Best.Same(rout.Best) || !slices.EqualFunc(wout.History, rout.History, recipe.Score.Same) {
		t.Errorf("kept %+v after resuming, %+v uninterrupted", rout.Best, wout.Best)
	}
}

// TestSearchHalves runs successive halving (Jamieson and Talwalkar,
// AISTATS 2016, Algorithm 1) over four candidates of a 40-epoch plan on
// Iris and checks the algorithm's bookkeeping: all four train to the
// first rung, E/4 = 10 epochs; the better two by validation score to
// E/2 = 20; the winner to the end. Each cut keeps the candidates whose
// scores rank first. And because a candidate continues where it paused,
// the winner's weights are bit for bit those of Fit on its plan alone.
func TestSearchHalves(t *testing.T) {
	_, train, val := iris(t)
	base := recipe.Plan{Hidden: []int{8}, Epochs: 40, Patience: -1, Seed: 2}
	cands := recipe.Candidates(base, 4)
	f, entries, err := recipe.Search(context.Background(), train, val, cands, false, nil)
	if err != nil {
		t.Fatal(err)
	}
	rounds := map[int][]int{}
	for i, e := range entries {
		rounds[e.Round] = append(rounds[e.Round], i)
		want := map[int]int{1: 10, 2: 20, 3: 40}[e.Round]
		if e.Epochs != want {
			t.Errorf("candidate %d left in round %d after %d epochs, want %d", i+1, e.Round, e.Epochs, want)
		}
	}
	if len(rounds[1]) != 2 || len(rounds[2]) != 1 || len(rounds[3]) != 1 {
		t.Fatalf("candidates per last round %v; want two out after round 1, one after round 2, one winner", rounds)
	}
	better := func(a, b recipe.Score) bool {
		return a.Value > b.Value || a.Value == b.Value && a.MinMargin > b.MinMargin
	}
	// After round 1 every survivor (left in round 2 or 3) ranked no lower
	// than every candidate cut; the scores compared are those after 10
	// epochs, which the survivors' histories hold.
	bestAt := func(h []recipe.Score, epochs int) recipe.Score {
		b := h[0]
		for _, s := range h[1:epochs] {
			if better(s, b) {
				b = s
			}
		}
		return b
	}
	for _, cut := range rounds[1] {
		for _, kept := range append(rounds[2], rounds[3]...) {
			if b := bestAt(entries[kept].History, 10); better(entries[cut].Best, b) {
				t.Errorf("candidate %d (%+v after 10 epochs) was cut while candidate %d (%+v) went on", cut+1, entries[cut].Best, kept+1, b)
			}
		}
	}
	cut2, kept2 := rounds[2][0], rounds[3][0]
	if b := bestAt(entries[kept2].History, 20); better(entries[cut2].Best, b) {
		t.Errorf("round 2 cut candidate %d (%+v) for candidate %d (%+v)", cut2+1, entries[cut2].Best, kept2+1, b)
	}
	winner := rounds[3][0]
	if f.Plan.Epochs != 40 || !slices.Equal(f.Plan.Hidden, entries[winner].Plan.Hidden) || f.Plan.StepFactor != entries[winner].Plan.StepFactor || f.Plan.Rho0 != entries[winner].Plan.Rho0 {
		t.Errorf("Search returned plan %+v, the winner's is %+v", f.Plan, entries[winner].Plan)
	}
	alone, err := recipe.Fit(context.Background(), train, val, cands[winner], false, nil)
	if err != nil {
		t.Fatal(err)
	}
	for i, p := range alone.Model().Params() {
		if !slices.Equal(p.Value, f.Model().Params()[i].Value) {
			t.Fatalf("parameter %s: the searched winner differs from the same plan fitted alone", p.Name)
		}
	}
	if !alone.Outcome.Best.Same(f.Outcome.Best) {
		t.Errorf("kept %+v in the search, %+v alone", f.Outcome.Best, alone.Outcome.Best)
	}
}

// TestCollapseRestarts drives a run into the collapse the session
// watches for, on data that holds nothing to learn: Iris's labels with
// every measurement set to zero, so that the network sees only its
// constant feature and answers one class for every row — at best the
// majority rate, a third (UCI description: 50 rows per species). A weight
// decay of 10 on the scales then pulls ρ below ρ0/20 within three epochs
// (ρ̇ = −2λρ + data term, and the data term can do no better than the
// class shares). Fit must notice, restart once from the next seed (the
// plan allows one restart), notice again, and report the collapse.
func TestCollapseRestarts(t *testing.T) {
	_, train, val := iris(t)
	blank := func(s *data.Set[float64]) *data.Set[float64] {
		c := *s
		c.X = make([]float64, len(s.X))
		return &c
	}
	var notes []string
	lastRho := 0.0
	obs := &recipe.Observer{
		Note:  func(s string) { notes = append(notes, s) },
		Epoch: func(r *recipe.EpochReport) error { lastRho = r.Info.Rho; return nil },
	}
	f, err := recipe.Fit(context.Background(), blank(train), blank(val), recipe.Plan{Hidden: []int{8}, Decay: 10, Restarts: 1, Seed: 1}, false, obs)
	if err != nil {
		t.Fatal(err)
	}
	if f.Outcome.Stop != recipe.StopCollapsed || f.Outcome.Restarts != 1 {
		t.Fatalf("stop %q after %d restarts; want a collapse after 1 restart", f.Outcome.Stop, f.Outcome.Restarts)
	}
	if f.Plan.Seed != 2 {
		t.Errorf("the restart ran seed %d, want the next seed, 2", f.Plan.Seed)
	}
	restarted := 0
	for _, n := range notes {
		if contains(n, "collapsed at the start") {
			restarted++
		}
	}
	if restarted != 1 {
		t.Errorf("%d restart notes, want 1: %q", restarted, notes)
	}
	if !(lastRho < 0.1/20) {
		t.Errorf("ρ = %v at the last epoch; a collapse needs it below ρ0/20 = 0.005", lastRho)
	}
	if f.Health.OK() {
		t.Error("the collapsed model passed the health check")
	}
}

// TestResolvedEpochs checks the step budget of the default plan by
// arithmetic on the documented constants: batch 32 gives ⌈rows/32⌉ steps
// an epoch; the default 100 epochs stretch to MinSteps steps on a small
// set and shrink to MaxSteps on a large one; patience stretches to
// PatienceSteps; a plan that names its epochs keeps them.
func TestResolvedEpochs(t *testing.T) {
	for _, c := range []struct {
		rows, epochs, patience int
		plan                   recipe.Plan
	}{
		{96, 1000, 200, recipe.Plan{}},                  // 3 steps an epoch: 3000/3 and 600/3
		{3200, 100, 15, recipe.Plan{}},                  // 100 steps an epoch: neither bound bites
		{48000, 40, 15, recipe.Plan{}},                  // 1500 steps an epoch: 60000/1500
		{96, 7, 4, recipe.Plan{Epochs: 7, Patience: 4}}, // named: kept
	} {
		p := c.plan.Resolved(c.rows)
		if p.Epochs != c.epochs || p.Patience != c.patience {
			t.Errorf("%d rows: %d epochs, patience %d; want %d and %d", c.rows, p.Epochs, p.Patience, c.epochs, c.patience)
		}
	}
}

// TestPrepareUnseenCategory: a categorical column whose every row has its
// own level (an identifier, say) leaves the held-out rows with levels no
// training row has. Prepare must not fail: it encodes them with an
// all-zero one-hot block, as serving does with ZeroUnseen, and says
// so in Unseen. (Invented data: the property holds for any table.)
func TestPrepareUnseenCategory(t *testing.T) {
	const n = 20
	tab := &data.Table{Source: "ids.csv", Label: "y", Rows: n}
	id := data.Column{Name: "id", Kind: data.Categorical}
	x := data.Column{Name: "x", Kind: data.Numeric}
	for r := range n {
		id.Cat = append(id.Cat, fmt.Sprintf("id%02d", r))
		x.Num = append(x.Num, float64(r%5))
		tab.Labels = append(tab.Labels, []string{"a", "b"}[r%2])
	}
	tab.Columns = []data.Column{id, x}
	p, err := recipe.Prepare[float64](tab, recipe.Split{Holdout: 0.25, Seed: 1})
	if err != nil {
		t.Fatal(err)
	}
	if len(p.Unseen) != 1 || !contains(p.Unseen[0], "id") {
		t.Fatalf("Unseen = %q; want one note naming the column", p.Unseen)
	}
	levels := p.Train.Rows // one level per training row
	if p.Val.Features != levels+1 {
		t.Fatalf("%d features, want %d levels and x", p.Val.Features, levels)
	}
	for r := range p.Val.Rows {
		for j, v := range p.Val.X[r*p.Val.Features : r*p.Val.Features+levels] {
			if v != 0 {
				t.Fatalf("validation row %d: one-hot feature %d is %v, want 0 for an unseen level", r, j, v)
			}
		}
	}
}

// TestExplodingLossRollsBack sets the step size of a linear least-squares
// model at four times its stability threshold, 2(1+μ)/λ_max for the heavy
// ball (optim.StableRate; λ_max of (2/n)X̃ᵀX̃ + 2λI from gonum, as in
// TestStepSizeLeastSquares): on a quadratic every step then grows the
// error along the top eigenvector, so the epoch loss rises by orders of
// magnitude (calculus of the linear recursion). The session must notice
// an exploded epoch loss before it turns non-finite, go back to the last
// epoch boundary with η cut fourfold — exactly the threshold, then below
// it — and end with finite weights.
func TestExplodingLossRollsBack(t *testing.T) {
	_, train, val := iris(t)
	plan := recipe.Plan{Hidden: []int{}, Norm: recipe.Plain, Decay: 1e-3, Warmup: -1, Floor: -1, Epochs: 30, Patience: -1, Restarts: -1, Seed: 1}
	// λ_max of the objective on these rows, measured the way the session
	// would (validated against gonum in TestStepSizeLeastSquares).
	probe, err := recipe.Fit(context.Background(), train, nil, recipe.Plan{Hidden: []int{}, Norm: recipe.Plain, Decay: 1e-3, Epochs: 1, Seed: 1}, false, nil)
	if err != nil {
		t.Fatal(err)
	}
	plan.LearningRate = 4 * optim.StableRate(probe.Outcome.Sharpness, recipe.Defaults().Momentum, false)
	var notes []string
	f, err := recipe.Fit(context.Background(), train, val, plan, false, &recipe.Observer{Note: func(s string) { notes = append(notes, s) }})
	if err != nil {
		t.Fatal(err)
	}
	back, exploded := 0, false
	for _, n := range notes {
		if contains(n, "goes back to the end of epoch") {
			back++
			exploded = exploded || contains(n, "mean loss")
		}
	}
	if !exploded {
		t.Errorf("no return was for an exploded epoch loss; notes %q", notes)
	}
	if back == 0 {
		t.Fatalf("no return to an epoch boundary at four times the stability threshold; notes %q", notes)
	}
	for _, p := range f.Model().Params() {
		for _, v := range p.Value {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				t.Fatalf("%s holds %v after the run", p.Name, v)
			}
		}
	}
	if f.Outcome.Lowered < back {
		t.Errorf("η lowered %d times for %d returns", f.Outcome.Lowered, back)
	}
}

// TestRankByAUC ranks the epochs of a two-class run (Iris versicolor
// against virginica, the two species that are not linearly separable;
// UCI description) by the ROC AUC of the validation scores: the kept
// epoch's value is its AUC, and the restored model's validation scores
// give that AUC again (the same forward pass on the same weights). A
// three-class run cannot rank by AUC and says so.
func TestRankByAUC(t *testing.T) {
	all, _, _ := iris(t)
	var rows []int
	for r := range all.Rows {
		if all.Class(r) > 0 {
			rows = append(rows, r)
		}
	}
	two := &data.Set[float64]{Rows: len(rows), Features: 4, Outputs: 1, Classes: []string{"versicolor", "virginica"}}
	for _, r := range rows {
		two.X = append(two.X, all.X[r*4:(r+1)*4]...)
		two.Y = append(two.Y, map[int]float64{1: -1, 2: 1}[all.Class(r)])
	}
	parts, err := recipe.SplitRows(two.Labels(), 0.3, 0, 1)
	if err != nil {
		t.Fatal(err)
	}
	train, val := two.Subset(parts[0]), two.Subset(parts[1])
	f, err := recipe.Fit(context.Background(), train, val, recipe.Plan{Hidden: []int{8}, Metric: recipe.AUC, Seed: 1}, false, nil)
	if err != nil {
		t.Fatal(err)
	}
	b := f.Outcome.Best
	if f.Outcome.Metric != recipe.AUC || b.Value != b.AUC || !(b.AUC > 0.5) {
		t.Errorf("kept %+v ranked by %v; want the value to be the AUC, above chance", b, f.Outcome.Metric)
	}
	if got := recipe.Evaluate(f.Model(), val).AUC(); got != b.AUC {
		t.Errorf("the restored model's AUC %v, the kept epoch's %v", got, b.AUC)
	}
	_, tr3, val3 := iris(t)
	if _, err := recipe.Fit(context.Background(), tr3, val3, recipe.Plan{Metric: recipe.AUC}, false, nil); err == nil || !contains(err.Error(), "two-class") {
		t.Errorf("ranking three classes by AUC: error %v; want one that says the AUC is for two classes", err)
	}
}

// TestContinuousLabel: a label column of measurements (a distinct
// fractional number per row) is refused with ErrContinuousLabel, naming
// the column; numbered classes pass — ten digits, and thirty whole-number
// codes over 600 rows. (Invented tables: the rule is about the labels'
// form, for any data.)
func TestContinuousLabel(t *testing.T) {
	table := func(rows int, label func(r int) string) *data.Table {
		tab := &data.Table{Source: "t.csv", Label: "target", Rows: rows}
		x := data.Column{Name: "x", Kind: data.Numeric}
		for r := range rows {
			x.Num = append(x.Num, float64(r%7))
			tab.Labels = append(tab.Labels, label(r))
		}
		tab.Columns = []data.Column{x}
		return tab
	}
	_, err := recipe.Prepare[float64](table(100, func(r int) string { return fmt.Sprintf("%.2f", 10+float64(r)*0.37) }), recipe.Split{Holdout: 0.2, Seed: 1})
	if !errors.Is(err, recipe.ErrContinuousLabel) || !contains(err.Error(), `column "target"`) || !contains(err.Error(), "100 distinct numbers") {
		t.Errorf("measurements as labels: error %v; want ErrContinuousLabel naming the column and the count", err)
	}
	for _, c := range []struct {
		rows  int
		label func(r int) string
	}{
		{200, func(r int) string { return fmt.Sprint(r % 10) }},
		{600, func(r int) string { return fmt.Sprint(100 + r%30) }},
	} {
		if _, err := recipe.Prepare[float64](table(c.rows, c.label), recipe.Split{Holdout: 0.2, Seed: 1}); err != nil {
			t.Errorf("%d rows of numbered classes refused: %v", c.rows, err)
		}
	}
}

// TestIdentifierColumn: a categorical column with a distinct value in
// every row (an identifier) is refused with ErrIdentifierColumn naming
// it, unless KeepIdentifiers; a categorical column of ten levels passes.
// (Invented tables: the rule is about the column's form, for any data.)
func TestIdentifierColumn(t *testing.T) {
	tab := &data.Table{Source: "orders.csv", Label: "y", Rows: 100}
	id := data.Column{Name: "order_id", Kind: data.Categorical}
	site := data.Column{Name: "site", Kind: data.Categorical}
	for r := range 100 {
		id.Cat = append(id.Cat, fmt.Sprintf("A-%04d", r))
		site.Cat = append(site.Cat, fmt.Sprintf("s%d", r%10))
		tab.Labels = append(tab.Labels, []string{"a", "b"}[r%2])
	}
	tab.Columns = []data.Column{site, id}
	_, err := recipe.Prepare[float64](tab, recipe.Split{Holdout: 0.2, Seed: 1})
	if !errors.Is(err, recipe.ErrIdentifierColumn) || !contains(err.Error(), `column "order_id"`) {
		t.Errorf("an identifier column: error %v; want ErrIdentifierColumn naming order_id", err)
	}
	if _, err := recipe.Prepare[float64](tab, recipe.Split{Holdout: 0.2, Seed: 1, KeepIdentifiers: true}); err != nil {
		t.Errorf("KeepIdentifiers still refused: %v", err)
	}
	tab.Columns = []data.Column{site}
	if _, err := recipe.Prepare[float64](tab, recipe.Split{Holdout: 0.2, Seed: 1}); err != nil {
		t.Errorf("ten levels refused: %v", err)
	}
}
