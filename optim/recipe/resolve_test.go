package recipe_test

import (
	"context"
	"slices"
	"testing"

	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/optim"
	"github.com/rhomb/rhomb/optim/recipe"
)

// TestFitRunsNoneAsNone: Fit resolves its plan's defaults and hands the
// resolved plan to its session; a negative Decay, Momentum or Patience
// ("none") must stay none there, not be read a second time as 0, "the
// default". The reference is a session made from the caller's plan
// directly, which resolves it once: Fit's first attempt must give the
// same bits, and the trainer must run with λ = 0 and μ = 0 (Fisher's
// Iris, REFERENCES.md; only determinism and the settings are checked).
func TestFitRunsNoneAsNone(t *testing.T) {
	_, train, val := iris(t)
	plan := recipe.Plan{Hidden: []int{8}, Norm: recipe.Plain, Decay: -1, Momentum: -1, Patience: -1, Epochs: 6, Seed: 2, Restarts: -1}
	f, err := recipe.Fit(context.Background(), train, val, plan, false, nil)
	if err != nil {
		t.Fatal(err)
	}
	n, _, err := recipe.Build[float64](plan, 4, 3)
	if err != nil {
		t.Fatal(err)
	}
	s, err := recipe.NewSession[float64](n, loss.Square[float64]{}, train, val, plan, nil)
	if err != nil {
		t.Fatal(err)
	}
	if st := s.Trainer().Settings(); st.WeightDecay != 0 || st.Momentum != 0 {
		t.Fatalf("test premise: the session runs with λ %v and μ %v, want 0 and 0", st.WeightDecay, st.Momentum)
	}
	if _, err := s.Run(context.Background()); err != nil {
		t.Fatal(err)
	}
	var fitParams [][]float64
	for _, p := range f.Model().Params() {
		fitParams = append(fitParams, p.Value)
	}
	for i, p := range optim.Model[float64](n).Params() {
		if !slices.Equal(p.Value, fitParams[i]) {
			t.Fatalf("parameter %s: Fit ran a different plan than the caller's (resolved twice?)", p.Name)
		}
	}
	if f.Plan.Decay != 0 || f.Plan.Momentum != 0 || f.Plan.Patience != 0 {
		t.Errorf("Fit's plan as run: decay %v, momentum %v, patience %v; want 0 (none)", f.Plan.Decay, f.Plan.Momentum, f.Plan.Patience)
	}
}
