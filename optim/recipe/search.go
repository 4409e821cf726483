package recipe

import (
	"context"
	"fmt"
	"slices"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net"
)

// Candidates returns n plans around base for a search: base itself first,
// then variations of one setting each — the step factor (×0.4, ×2.5),
// ρ0 (×0.1, ×10), λ (×10), the width (doubled; halved and one layer) —
// in that order, as many as n asks (at most 8).
func Candidates(base Plan, n int) []Plan {
	d := Defaults()
	or := func(v, def float64) float64 {
		if v <= 0 {
			return def
		}
		return v
	}
	hidden := base.Hidden
	if hidden == nil {
		hidden = d.Hidden
	}
	vary := func(f func(*Plan)) Plan {
		p := base
		p.Hidden = slices.Clone(hidden)
		f(&p)
		return p
	}
	all := []Plan{
		base,
		vary(func(p *Plan) { p.StepFactor = 0.4 * or(base.StepFactor, d.StepFactor) }),
		vary(func(p *Plan) { p.Rho0 = 0.1 * or(base.Rho0, d.Rho0) }),
		vary(func(p *Plan) { p.Decay = 10 * or(base.Decay, d.Decay) }),
		vary(func(p *Plan) {
			for i := range p.Hidden {
				p.Hidden[i] *= 2
			}
		}),
		vary(func(p *Plan) { p.StepFactor = min(2.5*or(base.StepFactor, d.StepFactor), 1) }),
		vary(func(p *Plan) { p.Rho0 = 10 * or(base.Rho0, d.Rho0) }),
		vary(func(p *Plan) {
			if len(p.Hidden) > 0 {
				p.Hidden = []int{max(p.Hidden[0]/2, 1)}
			}
		}),
	}
	return all[:min(max(n, 1), len(all))]
}

// Entry is one candidate of a search: its plan, how far it trained and
// its best validation score.
type Entry struct {
	Plan   Plan
	Epochs int   // epochs trained
	Best   Score // its best epoch's validation score
	Round  int   // the last round it took part in, from 1
	// History is its validation score after every epoch it trained.
	History []Score
}

// Search races candidate plans by successive halving (Jamieson and
// Talwalkar, AISTATS 2016; Li et al., JMLR 2018): every candidate trains
// the first rung of epochs, the better half by validation score (the
// plan's metric, then the minimum normalized margin) continues to twice
// as many, and so on until one is left, which trains to its plan's end.
// With n candidates and a plan of E epochs the rungs are E/2^k for
// k = ⌈log₂ n⌉ … 1, so the search costs about E·(1 + ⌈log₂ n⌉/2) epochs
// of training where one run costs E. Candidates continue where they
// paused: the survivor's run is the one it would have had alone.
//
// Every candidate's epochs and patience are counted on its own plan
// (Plan.Resolved), and a candidate stopped by its patience keeps its
// score without training further. Search returns the winner, fitted and
// checked as Fit returns it, and every candidate's entry in the order
// given. val must not be nil: the race is run on it.
func Search[T net.Float](ctx context.Context, train, val *data.Set[T], candidates []Plan, balance bool, obs *Observer) (*Fitted[T], []Entry, error) {
	if val == nil {
		return nil, nil, fmt.Errorf("recipe: Search ranks candidates on validation rows; there are none")
	}
	if len(candidates) == 0 {
		return nil, nil, fmt.Errorf("recipe: Search with no candidates")
	}
	var lf loss.Func[T] = loss.Square[T]{}
	if balance {
		lf = loss.Weighted[T]{Inner: lf, Weights: data.ClassWeights(train.Labels(), max(train.Outputs, 2))}
	}
	type runner struct {
		fit  *Fitted[T]
		sess *Session[T]
		done bool
	}
	runs := make([]*runner, len(candidates))
	entries := make([]Entry, len(candidates))
	for i, c := range candidates {
		plan := c.Resolved(train.Rows)
		n, w, err := Build[T](plan, train.Features, train.Outputs)
		if err != nil {
			return nil, nil, fmt.Errorf("recipe: candidate %d: %w", i+1, err)
		}
		f := &Fitted[T]{Network: n, Normalized: w, Loss: lf, Plan: plan}
		s, err := NewSession(f.Model(), lf, train, val, plan, nil)
		if err != nil {
			return nil, nil, fmt.Errorf("recipe: candidate %d: %w", i+1, err)
		}
		runs[i] = &runner{fit: f, sess: s}
		entries[i].Plan = plan
	}
	alive := make([]int, len(candidates))
	for i := range alive {
		alive[i] = i
	}
	rungs := 0
	for k := 1; k < len(candidates); k *= 2 {
		rungs++
	}
	for round := 1; ; round++ {
		last := len(alive) == 1
		for _, i := range alive {
			r := runs[i]
			if r.done {
				continue
			}
			var out Outcome
			var err error
			if last {
				out, err = r.sess.Run(ctx)
			} else {
				out, err = r.sess.RunUntil(ctx, max(r.fit.Plan.Epochs>>(rungs-round+1), 1))
			}
			r.fit.Outcome = out
			entries[i].Epochs, entries[i].Best, entries[i].Round, entries[i].History = out.Result.Epochs, out.Best, round, out.History
			if err != nil {
				return nil, entries, fmt.Errorf("recipe: candidate %d: %w", i+1, err)
			}
			r.done = out.Stop != StopPaused
		}
		if last {
			break
		}
		slices.SortStableFunc(alive, func(a, b int) int {
			switch ea, eb := entries[a].Best, entries[b].Best; {
			case ea.better(eb):
				return -1
			case eb.better(ea):
				return 1
			}
			return a - b
		})
		keep := (len(alive) + 1) / 2
		for _, i := range alive[keep:] {
			obs.note("search round %d: candidate %d out (validation %s %.4f after %d epochs)", round, i+1, entries[i].Plan.Metric, entries[i].Best.Value, entries[i].Epochs)
		}
		alive = alive[:keep]
	}
	w := runs[alive[0]]
	obs.note("search: candidate %d of %d kept (validation %s %.4f)", alive[0]+1, len(candidates), w.fit.Plan.Metric, entries[alive[0]].Best.Value)
	f := w.fit
	f.Health = Check(f.Model(), val, val.Classes)
	if f.Plan.Strict && !f.Health.OK() {
		return f, entries, fmt.Errorf("%w: %s", ErrDegenerate, f.Health.Problems[0])
	}
	return f, entries, nil
}
