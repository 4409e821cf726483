package recipe_test

import (
	"context"
	"encoding/json"
	"math"
	"slices"
	"strings"
	"testing"

	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/optim/recipe"
)

// TestBatchNormKeepsBestEpoch: a run with batch normalization that ends
// after its best epoch puts back that epoch's parameters and its running
// statistics together, so the kept model scores on the validation rows
// exactly what its epoch scored (Fisher's Iris, REFERENCES.md; the
// comparison is bit for bit, since the forward pass is deterministic).
// Had only the parameters been put back, the last epoch's running
// statistics would normalize the kept weights.
func TestBatchNormKeepsBestEpoch(t *testing.T) {
	_, train, val := iris(t)
	plan := recipe.Plan{Hidden: []int{8}, Norm: recipe.Plain, BatchNorm: true, Epochs: 40, Patience: -1, Seed: 3}
	f, err := recipe.Fit(context.Background(), train, val, plan, false, nil)
	if err != nil {
		t.Fatal(err)
	}
	out := f.Outcome
	if out.Best.Epoch == out.Result.Epochs {
		t.Fatalf("test premise: the best epoch (%d) is the last; pick a plan whose best comes earlier", out.Best.Epoch)
	}
	if len(f.Network.Running()) != 2 {
		t.Fatalf("%d running statistics; want the mean and variance of one batch-norm node", len(f.Network.Running()))
	}
	e := recipe.Evaluate(f.Model(), val)
	if e.Accuracy() != out.Best.Accuracy || math.Float64bits(e.MinMargin) != math.Float64bits(out.Best.MinMargin) {
		t.Errorf("kept model: accuracy %v, minimum margin %v; its epoch %d scored %v, %v",
			e.Accuracy(), e.MinMargin, out.Best.Epoch, out.Best.Accuracy, out.Best.MinMargin)
	}
}

// TestBatchNormResumeSameBits: a batch-normalized run canceled after its
// third epoch and resumed from its state (parameters, running statistics,
// the trainer's and the session's state, through JSON as a checkpoint
// stores it) ends with the same bits as the run never interrupted.
func TestBatchNormResumeSameBits(t *testing.T) {
	_, train, val := iris(t)
	plan := recipe.Plan{Hidden: []int{8}, Norm: recipe.Plain, BatchNorm: true, Epochs: 12, Patience: -1, Seed: 5, Temperature: 1e-6}
	newModel := func() (*recipe.Fitted[float64], *recipe.Session[float64], context.Context) {
		n, w, err := recipe.Build[float64](plan, 4, 3)
		if err != nil {
			t.Fatal(err)
		}
		f := &recipe.Fitted[float64]{Network: n, Normalized: w, Loss: loss.Square[float64]{}}
		ctx, cancel := context.WithCancel(context.Background())
		t.Cleanup(cancel)
		s, err := recipe.NewSession(f.Model(), f.Loss, train, val, plan, &recipe.Observer{Epoch: func(r *recipe.EpochReport) error {
			if r.Score.Epoch == 3 {
				cancel()
			}
			return nil
		}})
		if err != nil {
			t.Fatal(err)
		}
		return f, s, ctx
	}
	whole, ws, _ := newModel()
	wout, err := ws.Run(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	part, ps, ctx := newModel()
	if _, err := ps.Run(ctx); err == nil {
		t.Fatal("the canceled run returned no error")
	}
	saved, tst := ps.State(), ps.Trainer().State()
	params, running := len(part.Model().Params()), len(part.Network.Running())
	if len(saved.Kept) != params+running || running != 2 {
		t.Fatalf("the session keeps %d arrays for %d parameters and %d running statistics", len(saved.Kept), params, running)
	}
	b, err := json.Marshal(saved)
	if err != nil {
		t.Fatal(err)
	}
	var st recipe.SessionState
	if err := json.Unmarshal(b, &st); err != nil {
		t.Fatal(err)
	}
	st.Kept = saved.Kept
	rest, rs, _ := newModel()
	for i, p := range rest.Model().Params() {
		copy(p.Value, part.Model().Params()[i].Value)
	}
	for i, r := range rest.Network.Running() {
		copy(r.Value, part.Network.Running()[i].Value)
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
	for i, r := range whole.Network.Running() {
		if !slices.Equal(r.Value, rest.Network.Running()[i].Value) {
			t.Fatalf("running statistic %s differs between the resumed and the uninterrupted run", r.Name)
		}
	}
	if !wout.Best.Same(rout.Best) || !slices.EqualFunc(wout.History, rout.History, recipe.Score.Same) {
		t.Errorf("kept %+v after resuming, %+v uninterrupted", rout.Best, wout.Best)
	}
}

// TestBatchNormNeedsPlain: batch normalization with weight normalization
// is refused, naming the field.
func TestBatchNormNeedsPlain(t *testing.T) {
	_, _, err := recipe.Build[float64](recipe.Plan{BatchNorm: true}, 4, 3)
	if err == nil || !strings.Contains(err.Error(), "Plan.Norm") {
		t.Errorf("BatchNorm with per-layer weight normalization: %v", err)
	}
}
