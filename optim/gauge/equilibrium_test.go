package gauge

import (
	"context"
	"errors"
	"math"
	"slices"
	"testing"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/normalize"
	"github.com/rhomb/rhomb/optim"
)

func step(n int, rho, star float64, speed ...float64) *optim.StepInfo {
	return &optim.StepInfo{Step: n, Rho: rho, RhoStar: star, DirSpeed: speed}
}

// The criterion on a sequence worked by hand: Window 3, GapTol 0.1,
// SpeedTol 0.5. Speeds √(3²+4²) = 5 (peak), then 2, 2, 1, 1, 1; gaps
// 0.5, 0.05, 0.05, NaN (ρ* undefined), 0.05, 0.05, 0.05. The run of
// steps meeting both bounds goes 0, 1, 2, 0, 1, 2, 3: reached at step 7.
func TestEquilibriumSequence(t *testing.T) {
	e := NewEquilibrium(EquilibriumOptions{GapTol: 0.1, SpeedTol: 0.5, Window: 3})
	seq := []*optim.StepInfo{
		step(1, 1.5, 1, 3, 4),
		step(2, 1.05, 1, 2),
		step(3, 0.95, 1, 2),
		step(4, 1, math.NaN(), 1),
		step(5, 2.1, 2, 1),
		step(6, 1.9, 2, 1),
		step(7, 2.1, 2, 1),
	}
	runs := []int{0, 1, 2, 0, 1, 2, 3}
	for i, s := range seq {
		st := e.Observe(s)
		if st.Run != runs[i] {
			t.Errorf("step %d: run %d, want %d (%+v)", s.Step, st.Run, runs[i], st)
		}
		if st.Reached != (i == 6) {
			t.Errorf("step %d: reached = %v", s.Step, st.Reached)
		}
	}
	if e.Reached() != 7 || e.Last().Peak != 5 {
		t.Errorf("reached at %d, peak %v; want 7 and 5", e.Reached(), e.Last().Peak)
	}
	if relGap(1, 0) == relGap(1, 0) || !math.IsNaN(relGap(1, -2)) {
		t.Error("relGap of a non-positive ρ* must be NaN")
	}
}

// A real run in every scale mode: full-batch gradient descent with weight
// decay on a separable two-class problem, from a small ρ0. The flow has a
// fixed point (REFERENCES.md: ρ̇ = 0 at ρ*, V̇ = 0) in each mode, with the
// ρ* of that mode (optim.RhoStar: one global scale, a scale per layer or
// per unit, a plain network); gradient descent with a small step
// approaches it, so the default criterion must eventually hold, and Stop
// must end the run there with optim's Stopped status. At that step ρ is
// within GapTol of ρ* recomputed on the whole set's normalized outputs
// (loss.Square.Quadratic and optim.RhoStar with the mode's layer codes; an
// independent path: full batch, so the trainer's minibatch is the whole
// set). Before ρ* followed the mode, the criterion never fired under
// per-layer scales.
func TestEquilibriumReachedInTraining(t *testing.T) {
	set := &data.Set[float64]{Rows: 8, Features: 2, Outputs: 1}
	pts := [][2]float64{{1, 0.2}, {0.8, -0.3}, {1.2, 0.5}, {0.9, 0.1}, {-1, 0.3}, {-0.7, -0.2}, {-1.1, -0.4}, {-0.9, 0.2}}
	for i, p := range pts {
		set.X = append(set.X, p[0], p[1])
		y := 1.0
		if i >= 4 {
			y = -1
		}
		set.Y = append(set.Y, y)
	}
	for _, mode := range []struct {
		name  string
		o     *normalize.Options
		codes []int8 // normalize.Net.LayerScales's codes for the two layers
	}{
		{"global", &normalize.Options{Scale: normalize.Global}, []int8{1, -1}},
		{"per-layer", &normalize.Options{}, []int8{1, 1}},
		{"per-unit", &normalize.Options{PerUnit: true}, []int8{1, 1}},
		{"plain", nil, []int8{1, 1}},
	} {
		t.Run(mode.name, func(t *testing.T) {
			n, _ := net.NewBuilder[float64](2).Dense("h", 6).ReLU("r").Readout("out", 1).Build()
			_ = n.Init(net.InitSettings{Rho0: 0.1, Seed: 3})
			var m optim.Model[float64] = n
			if mode.o != nil {
				w, err := normalize.Wrap(n, *mode.o)
				if err != nil {
					t.Fatal(err)
				}
				if got := w.LayerScales(nil); !slices.Equal(got, mode.codes) {
					t.Fatalf("layer codes %v, want %v", got, mode.codes)
				}
				m = w
			}
			e := NewEquilibrium(EquilibriumOptions{Stop: true})
			var at float64
			hooks := &optim.Hooks{Step: func(s *optim.StepInfo) error {
				err := e.Hook()(s)
				if err != nil {
					at = s.Rho // before the update, as RhoStar
				}
				return err
			}}
			const lambda = 0.01
			tr, err := optim.NewTrainer[float64](m, loss.Square[float64]{}, set, optim.Settings{LearningRate: 0.1, WeightDecay: lambda, Epochs: 20000, Hooks: hooks})
			if err != nil {
				t.Fatal(err)
			}
			res, err := tr.Run(context.Background())
			if err != nil || res.Status != optim.Stopped {
				t.Fatalf("status %v, err %v, reached at %d: the run did not settle", res.Status, err, e.Reached())
			}
			if e.Reached() != res.Steps || e.Reached() < e.Options().Window {
				t.Errorf("reached at %d, run stopped after %d steps", e.Reached(), res.Steps)
			}
			if e.Last().Gap > e.Options().GapTol || e.Last().Speed > e.Options().SpeedTol*e.Last().Peak {
				t.Errorf("stopped outside the criterion: %+v", e.Last())
			}
			out := m.Forward(set.X, set.Rows)
			rho := m.Base().Rho()
			f := make([]float64, set.Rows)
			for i, v := range out {
				f[i] = v / rho
			}
			a, b := loss.Square[float64]{}.Quadratic(f, set.Y, set.Rows, 1)
			star := optim.RhoStar(a, b, lambda, mode.codes)
			t.Logf("stopped at step %d: ρ %v (before the last update %v), full-set ρ* %v, gap %v; detector %+v", res.Steps, rho, at, star, relGap(rho, star), e.Last())
			// The detector saw the weights before the last update; these
			// are after it. A small gradient step moves ρ towards ρ*, and
			// the directions barely move (their speed is below 5% of its
			// peak), so the gap is still within GapTol.
			if g := relGap(rho, star); !(g <= e.Options().GapTol) {
				t.Errorf("full-set gap after the run %v > GapTol %v", g, e.Options().GapTol)
			}
			if errors.Is(err, optim.ErrStop) {
				t.Error("Run should swallow ErrStop")
			}
		})
	}
}
