package recipe

import (
	"context"
	"errors"
	"fmt"
	"math"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/optim"
)

// Stop says why a run ended.
type Stop int

const (
	StopEpochs    Stop = iota // the plan's last epoch was run
	StopPatience              // Patience epochs passed without a better validation score
	StopCollapsed             // the run collapsed at the start (see Session.Run)
	StopCanceled              // the context was canceled
	StopHook                  // a caller's hook asked to stop
	StopPaused                // RunUntil reached its epoch; Run continues
	StopDiverged              // steps kept going non-finite after maxRollbacks returns
)

func (s Stop) String() string {
	switch s {
	case StopEpochs:
		return "last epoch reached"
	case StopPatience:
		return "no better validation score for the patience window"
	case StopCollapsed:
		return "collapsed at the start"
	case StopCanceled:
		return "interrupted"
	case StopHook:
		return "stopped by a hook"
	case StopPaused:
		return "paused"
	case StopDiverged:
		return "diverged: steps kept going non-finite with ever smaller step sizes"
	}
	return fmt.Sprintf("Stop(%d)", int(s))
}

// Score is one epoch's validation figures.
type Score struct {
	Epoch int // from 1
	// Value is the plan's metric on the validation rows.
	Value float64
	// Accuracy, Balanced, MacroF1 and AUC are every metric, whatever the
	// plan ranks by; AUC is NaN with more than two classes.
	Accuracy, Balanced, MacroF1, AUC float64
	// MinMargin is the smallest normalized margin over the validation
	// rows: y·f(x; V) for one output, f_y − max_{j≠y} f_j for more, with
	// f(x; V) = f(x; W)/ρ.
	MinMargin float64
	// Rate is the base step size η of the epoch (before the schedule).
	Rate float64
}

// Same reports whether s and t hold the same figures, bit for bit (a NaN,
// such as the AUC of a many-class model, equals a NaN).
func (s Score) Same(t Score) bool {
	eq := func(a, b float64) bool { return math.Float64bits(a) == math.Float64bits(b) }
	return s.Epoch == t.Epoch && eq(s.Value, t.Value) && eq(s.Accuracy, t.Accuracy) && eq(s.Balanced, t.Balanced) &&
		eq(s.MacroF1, t.MacroF1) && eq(s.AUC, t.AUC) && eq(s.MinMargin, t.MinMargin) && eq(s.Rate, t.Rate)
}

// better reports whether s ranks above t: a higher metric, or the same
// metric and a larger minimum normalized margin.
func (s Score) better(t Score) bool {
	if s.Value != t.Value {
		return s.Value > t.Value
	}
	return s.MinMargin > t.MinMargin
}

// EpochReport is handed to Observer.Epoch after every epoch.
type EpochReport struct {
	Info  *optim.EpochInfo // the trainer's figures; valid during the call
	Score Score            // validation; zero Epoch without validation rows
	Best  bool             // this epoch is the best so far
	Rate  float64          // η used in this epoch's last step
}

// Observer receives a run's progress. Every field is optional.
type Observer struct {
	// Hooks are joined with the recipe's own (optim.Join).
	Hooks *optim.Hooks
	// Epoch is called after the recipe has scored the epoch.
	Epoch func(*EpochReport) error
	// Note receives one line for every decision the recipe takes on its
	// own: the measured step size, a restart, a lowered rate.
	Note func(string)
}

func (o *Observer) note(format string, args ...any) {
	if o != nil && o.Note != nil {
		o.Note(fmt.Sprintf(format, args...))
	}
}

// Outcome is what a run did.
type Outcome struct {
	Result optim.Result // the trainer's result for the last attempt
	Stop   Stop
	// Best is the chosen epoch's score; the model holds its weights. With
	// no validation rows the last epoch is kept and Best.Epoch is the
	// last epoch.
	Best Score
	// Metric is what Best.Value measures.
	Metric Metric
	// Sharpness is the largest curvature measured at the start (NaN when
	// the plan fixed the learning rate); Rate the base η the run began
	// with.
	Sharpness, Rate float64
	// Restarts counts the restarts after a collapse; Lowered the times η
	// was lowered during the run (a non-finite step or a rising loss).
	Restarts, Lowered int
	History           []Score
}

// explosion is the rise of the epoch loss over the last epoch's that
// counts as divergence.
const explosion = 10

// DivergenceError reports a run that left the region where its step is
// stable without a non-finite step: an epoch loss that exploded, or a
// curvature that cannot be measured. Session.Run goes back to the last
// epoch boundary as after a non-finite step.
type DivergenceError struct {
	Epoch int // from 1; 0 when found between epochs
	What  string
}

func (e *DivergenceError) Error() string { return "recipe: the run diverged: " + e.What }

// divergence reports whether err says the run diverged, and how, in words.
func divergence(err error) (bool, string) {
	var nf *optim.NonFiniteError
	var dv *DivergenceError
	switch {
	case errors.As(err, &nf):
		return true, fmt.Sprintf("step %d gave a non-finite %s", nf.Step, nf.What)
	case errors.As(err, &dv):
		return true, dv.What
	}
	return false, ""
}

// maxRollbacks is how many times a run goes back to an epoch boundary
// after a non-finite step, each time with the rate cut by rateCut, before
// it ends (StopDiverged) with the best epoch so far.
const (
	maxRollbacks = 4
	rateCut      = 0.25
)

// Session trains one model under a plan, scoring every epoch on the
// validation rows and keeping the best weights.
type Session[T net.Float] struct {
	model      optim.Model[T]
	lf         loss.Func[T]
	train, val *data.Set[T]
	plan       Plan
	obs        *Observer
	tr         *optim.Trainer[T]
	rate       *rate

	// live are the arrays a session keeps and puts back: the model's
	// parameters, in Params order, then its network's running statistics
	// (batch normalization), which are not parameters but belong to the
	// same epoch's model. best and good hold copies of them.
	live      [][]T
	best      [][]T
	out       Outcome
	since     int     // epochs since the best
	lastLoss  float64 // the previous epoch's mean loss
	majority  float64 // the validation rows' majority-class rate
	stopAfter Stop
	pauseAt   int          // RunUntil's epoch; 0 for none
	rollbacks int          // returns to an epoch boundary after a non-finite step
	cap       float64      // the most η may become again after a rollback; 0 for no cap
	probe     *data.Set[T] // the training rows the curvature is measured on
	// good and goodState are the weights and trainer state at the last
	// epoch boundary, where a non-finite step sends the run back.
	good      [][]T
	goodState optim.State
}

// NewSession prepares a run of model on train, scored on val (which may
// be nil: then the last epoch is kept and Patience does nothing). The
// model's current weights are the start; plan's zero fields take their
// defaults.
func NewSession[T net.Float](model optim.Model[T], lf loss.Func[T], train, val *data.Set[T], plan Plan, obs *Observer) (*Session[T], error) {
	plan = plan.forRows(train.Rows).filled()
	if err := plan.check(); err != nil {
		return nil, err
	}
	if plan.Metric == AUC && train.Outputs != 1 {
		return nil, fmt.Errorf("recipe: the AUC ranks a two-class model's scores; the data has %d classes: rank by balanced accuracy or macro-F1 instead", train.Outputs)
	}
	s := &Session[T]{model: model, lf: lf, train: train, val: val, plan: plan, obs: obs, lastLoss: math.NaN()}
	s.out.Metric = plan.Metric
	s.out.Sharpness = math.NaN()
	s.rate = &rate{warm: plan.Warmup, floor: plan.Floor, epochs: plan.Epochs}
	if plan.LearningRate > 0 {
		s.rate.base = plan.LearningRate
		s.out.Rate = plan.LearningRate
	} else {
		s.probe = probeRows(train, plan.Seed)
	}
	if val != nil {
		s.majority = majorityRate(val)
	}
	hooks := &optim.Hooks{Epoch: s.epoch}
	if s.probe != nil {
		hooks.Step = s.step
	}
	var extra *optim.Hooks
	if obs != nil {
		extra = obs.Hooks
	}
	if plan.Schedule != nil {
		s.rate.custom = plan.Schedule
	}
	settings := optim.Settings{
		LearningRate: 1, Schedule: s.rate, BatchSize: plan.Batch, Sampling: plan.Sampling, Momentum: plan.Momentum,
		Nesterov: plan.Nesterov, WeightDecay: plan.Decay, Temperature: plan.Temperature, Epochs: plan.Epochs,
		TargetLoss: plan.TargetLoss, Seed: plan.Seed, Hooks: optim.Join(hooks, extra),
	}
	tr, err := optim.NewTrainer[T](model, lf, train, settings)
	if err != nil {
		return nil, err
	}
	s.tr = tr
	for _, p := range model.Params() {
		s.live = append(s.live, p.Value)
	}
	for _, r := range model.Base().Running() {
		s.live = append(s.live, r.Value)
	}
	for _, v := range s.live {
		s.best = append(s.best, make([]T, len(v)))
	}
	return s, nil
}

// Trainer is the session's trainer, for checkpoints (State).
func (s *Session[T]) Trainer() *optim.Trainer[T] { return s.tr }

// Plan is the plan with its defaults filled in.
func (s *Session[T]) Plan() Plan { return s.plan }

// Run trains until the plan's last epoch, the patience runs out, the run
// collapses, a hook stops it or ctx is canceled, then puts the best
// epoch's weights back into the model — except after a cancel, when the
// model keeps its current weights so that State and the trainer's state
// make a checkpoint that resumes to the same bits; Run again continues. A non-finite step lowers η by a
// factor of four and goes on from the weights before it, at most four
// times.
//
// Collapse: after three epochs, a run whose ρ has fallen below ρ0/20 while
// its validation accuracy is at or below the majority-class rate has lost
// its scale (common practice, no source: with a small ρ the outputs, and
// with them the gradients of the directions, vanish); Run stops it with
// StopCollapsed and the caller may restart (Fit does).
func (s *Session[T]) Run(ctx context.Context) (Outcome, error) {
	if s.rate.base == 0 {
		h, err := s.sharpness()
		if err != nil {
			return s.out, err
		}
		s.out.Sharpness = h
		th := optim.StableRate(h, s.plan.Momentum, s.plan.Nesterov)
		s.rate.base = s.plan.StepFactor * th
		s.out.Rate = s.rate.base
		s.obs.note("step size: curvature %.4g on %d training rows, stability threshold %.4g, η = %.3g × that = %.4g",
			h, s.probe.Rows, th, s.plan.StepFactor, s.rate.base)
	}
	if s.good == nil {
		s.keepGood()
	}
	s.stopAfter = StopEpochs
	for {
		res, err := s.tr.Run(ctx)
		s.out.Result = res
		diverged, what := divergence(err)
		if diverged && s.rollbacks < maxRollbacks && s.good != nil {
			s.rollbacks++
			s.out.Lowered++
			s.rate.base *= rateCut
			s.cap = s.rate.base
			if err := s.rollBack(); err != nil {
				return s.out, err
			}
			s.obs.note("%s; the run goes back to the end of epoch %d with η lowered to %.4g", what, s.goodState.Epoch, s.rate.base)
			continue
		}
		switch {
		case diverged && s.out.Best.Epoch > 0:
			s.obs.note("%s after %d returns to an epoch boundary; the run ends with its best epoch", what, s.rollbacks)
			s.out.Stop, err = StopDiverged, nil
		case res.Status == optim.Canceled:
			s.out.Stop = StopCanceled
		case res.Status == optim.Stopped && s.stopAfter != StopEpochs:
			s.out.Stop = s.stopAfter
		case res.Status == optim.Stopped:
			s.out.Stop = StopHook
		default:
			s.out.Stop = StopEpochs
		}
		// A canceled or paused run keeps its current weights, to resume
		// from; every other end puts the best epoch back.
		if s.out.Stop != StopCanceled && s.out.Stop != StopPaused && s.val != nil && s.out.Best.Epoch > 0 {
			s.restoreBest()
		}
		return s.out, err
	}
}

// epoch scores the epoch, keeps the best weights and decides whether to
// go on.
func (s *Session[T]) epoch(ei *optim.EpochInfo) error {
	// An epoch whose mean loss is not finite, or rose more than tenfold
	// over the last one's, has left the region where the step is stable
	// (common practice, no source: a stable run's epoch loss moves by a
	// fraction, not by orders of magnitude); so has one where the
	// curvature can no longer be measured. Its weights are not kept: the
	// run goes back to the last epoch boundary.
	if notFinite := ei.Loss != ei.Loss || math.IsInf(ei.Loss, 0); notFinite || ei.Loss > explosion*s.lastLoss {
		return &DivergenceError{Epoch: ei.Epoch + 1, What: fmt.Sprintf("epoch %d's mean loss %.4g after %.4g", ei.Epoch+1, ei.Loss, s.lastLoss)}
	}
	rate := s.rate.base
	if err := s.remeasure(fmt.Sprintf("epoch %d", ei.Epoch+1)); err != nil {
		return err
	}
	sc := Score{Epoch: ei.Epoch + 1, Rate: rate}
	if s.val != nil {
		sc = s.score(ei.Epoch+1, rate)
	}
	best := s.val == nil || s.out.Best.Epoch == 0 || sc.better(s.out.Best)
	if best {
		s.out.Best = sc
		s.since = 0
		if s.val != nil {
			s.keepBest()
		}
	} else {
		s.since++
	}
	s.out.History = append(s.out.History, sc)
	s.keepGood()
	s.lastLoss = ei.Loss
	if s.obs != nil && s.obs.Epoch != nil {
		if err := s.obs.Epoch(&EpochReport{Info: ei, Score: sc, Best: best, Rate: s.rate.base}); err != nil {
			return err
		}
	}
	switch {
	case s.val != nil && sc.Epoch >= 3 && ei.Rho < s.plan.Rho0/20 && sc.Accuracy <= s.majority:
		s.stopAfter = StopCollapsed
		return optim.ErrStop
	case s.val != nil && s.plan.Patience > 0 && s.since >= s.plan.Patience:
		s.stopAfter = StopPatience
		return optim.ErrStop
	case s.pauseAt > 0 && sc.Epoch >= s.pauseAt && sc.Epoch < s.plan.Epochs:
		s.stopAfter = StopPaused
		return optim.ErrStop
	}
	return nil
}

// RunUntil is Run, paused at the end of the given epoch (counting from 1
// over the whole run) with the current weights, unless the run ends
// earlier; Run or RunUntil again continues it to the same bits as a run
// never paused.
func (s *Session[T]) RunUntil(ctx context.Context, epoch int) (Outcome, error) {
	s.pauseAt = epoch
	defer func() { s.pauseAt = 0 }()
	return s.Run(ctx)
}

// step re-measures the curvature at steps 1, 2, 4, 8, …: while ρ grows
// from its small start the curvature grows with it, faster than once an
// epoch can follow.
func (s *Session[T]) step(si *optim.StepInfo) error {
	if si.Step&(si.Step-1) != 0 {
		return nil
	}
	return s.remeasure(fmt.Sprintf("step %d", si.Step))
}

// remeasure sets η = StepFactor × the stability threshold of the curvature
// measured now. η falls at once; it rises at most twofold per measurement,
// so that one low reading cannot throw the run, and never again above the
// rate a rollback set.
func (s *Session[T]) remeasure(when string) error {
	if s.probe == nil {
		return nil
	}
	h, err := s.sharpness()
	if err != nil {
		// The curvature cannot be measured where the weights are now (a
		// non-finite loss or gradient near them): the step was too large.
		return &DivergenceError{What: fmt.Sprintf("%s: %v", when, err)}
	}
	r := min(s.plan.StepFactor*optim.StableRate(h, s.plan.Momentum, s.plan.Nesterov), 2*s.rate.base)
	if s.cap > 0 {
		r = min(r, s.cap) // a step size that diverged is not tried again
	}
	if r < s.rate.base/2 {
		s.obs.note("%s: curvature %.4g; η lowered from %.4g to %.4g", when, h, s.rate.base, r)
		s.out.Lowered++
	}
	s.rate.base = r
	return nil
}

// keepGood remembers the weights and the trainer's state at an epoch
// boundary (or the start).
func (s *Session[T]) keepGood() {
	if s.good == nil {
		for _, v := range s.live {
			s.good = append(s.good, make([]T, len(v)))
		}
	}
	for i, v := range s.live {
		copy(s.good[i], v)
	}
	s.goodState = s.tr.State()
}

// rollBack returns the weights and the trainer to the last epoch
// boundary.
func (s *Session[T]) rollBack() error {
	s.put(s.good)
	return s.tr.Restore(s.goodState)
}

func (s *Session[T]) keepBest() {
	for i, v := range s.live {
		copy(s.best[i], v)
	}
}

func (s *Session[T]) restoreBest() { s.put(s.best) }

// put copies saved values into the live arrays and brings the model's
// derived weights up to date.
func (s *Session[T]) put(saved [][]T) {
	for i, v := range s.live {
		copy(v, saved[i])
	}
	optim.Resync(s.model)
}

// score measures the validation rows with forward passes only.
func (s *Session[T]) score(epoch int, rate float64) Score {
	sc := Score{Epoch: epoch, Rate: rate}
	c := Evaluate(s.model, s.val)
	sc.Accuracy, sc.Balanced, sc.MacroF1, sc.AUC, sc.MinMargin = c.Accuracy(), c.Balanced(), c.MacroF1(), c.AUC(), c.MinMargin
	sc.Value = c.Value(s.plan.Metric)
	return sc
}

// sharpness measures the largest curvature of the objective on the probe
// rows. A network with batch normalization is measured in training mode,
// normalized by the probe rows' own statistics as the steps are by their
// batch's, with its running statistics held: the curvature of the
// objective the steps descend, not of the inference-mode function, whose
// running statistics (at first 0 and 1) say nothing of the weights'
// scale.
func (s *Session[T]) sharpness() (float64, error) {
	base := s.model.Base()
	base.HoldRunning(true)
	optim.SetTraining(s.model, true)
	defer func() {
		optim.SetTraining(s.model, false)
		base.HoldRunning(false)
	}()
	est, err := optim.Sharpness(s.model, s.lf, s.probe.X, s.probe.Y, s.probe.Rows, optim.SharpnessSettings{WeightDecay: s.plan.Decay, Seed: s.plan.Seed})
	if err != nil {
		return 0, fmt.Errorf("recipe: measuring the step size: %w", err)
	}
	h := math.Abs(est.Value)
	if !(h > 0) || math.IsInf(h, 0) {
		return 0, fmt.Errorf("recipe: the measured curvature is %v; set a learning rate by hand", est.Value)
	}
	return h, nil
}

// probeSize is the number of training rows the curvature is measured on:
// enough rows that one batch's curvature stands for the set's (common
// practice, no source), few enough to cost a fraction of an epoch.
const probeSize = 512

// probeRows draws the rows the curvature is measured on (all of a small
// set), seeded.
func probeRows[T net.Float](s *data.Set[T], seed uint64) *data.Set[T] {
	if s.Rows <= probeSize {
		return s
	}
	rows, err := data.Stratified(s.Labels(), []float64{float64(probeSize) / float64(s.Rows), 1 - float64(probeSize)/float64(s.Rows)}, seed^0x70726f6265)
	if err != nil || len(rows[0]) == 0 {
		idx := make([]int, probeSize)
		for i := range idx {
			idx[i] = i * s.Rows / probeSize
		}
		return s.Subset(idx)
	}
	return s.Subset(rows[0])
}

func majorityRate[T net.Float](s *data.Set[T]) float64 {
	counts := map[int]int{}
	most := 0
	for r := range s.Rows {
		c := s.Class(r)
		counts[c]++
		most = max(most, counts[c])
	}
	return float64(most) / float64(s.Rows)
}

// rate is the schedule: a linear warm-up from base/10 over the first
// epochs, then half a cosine down to floor·base at the last epoch. base
// may be lowered between steps; the trainer's LearningRate is 1.
type rate struct {
	custom optim.Schedule // replaces the warm-up and cosine when set
	base   float64
	warm   int
	floor  float64
	epochs int
}

func (r *rate) Factor(p optim.Progress) float64 {
	if r.custom != nil {
		return r.base * r.custom.Factor(p)
	}
	spe := max(p.StepsPerEpoch, 1)
	warm := r.warm * spe
	if p.Step < warm {
		return r.base * (0.1 + 0.9*float64(p.Step)/float64(warm))
	}
	if r.floor >= 1 {
		return r.base
	}
	total := max(p.Steps-warm-1, 1)
	t := min(float64(p.Step-warm)/float64(total), 1)
	return r.base * (r.floor + (1-r.floor)*(1+math.Cos(math.Pi*t))/2)
}

// SessionState is what a session carries from epoch to epoch besides the
// trainer's own state and the model's weights: with both, a run resumes
// to the same bits as one never interrupted.
type SessionState struct {
	Rate      float64
	Sharpness float64
	LastLoss  float64
	Best      Score
	Since     int
	Lowered   int
	Rollbacks int
	Cap       float64
	History   []Score
	// Kept holds the best epoch's parameters, in Params order, then its
	// running statistics (batch normalization, in the network's Running
	// order), widened to float64 (exact for float32); nil before the first
	// scored epoch.
	Kept [][]float64
}

// State returns a copy of the session's state, for a checkpoint.
func (s *Session[T]) State() SessionState {
	st := SessionState{Rate: s.rate.base, Sharpness: s.out.Sharpness, LastLoss: s.lastLoss, Best: s.out.Best,
		Since: s.since, Lowered: s.out.Lowered, Rollbacks: s.rollbacks, Cap: s.cap, History: append([]Score(nil), s.out.History...)}
	if s.val != nil && s.out.Best.Epoch > 0 {
		for _, b := range s.best {
			w := make([]float64, len(b))
			for i, v := range b {
				w[i] = float64(v)
			}
			st.Kept = append(st.Kept, w)
		}
	}
	return st
}

// Restore sets the session's state and its trainer's, from a checkpoint
// of a session with the same model, data and plan.
func (s *Session[T]) Restore(st SessionState, tr optim.State) error {
	if st.Kept != nil && len(st.Kept) != len(s.best) {
		return fmt.Errorf("recipe: the checkpoint keeps %d arrays, the model has %d (parameters and running statistics)", len(st.Kept), len(s.best))
	}
	for i, w := range st.Kept {
		if len(w) != len(s.best[i]) {
			return fmt.Errorf("recipe: kept parameter %d has %d values, the model's has %d", i, len(w), len(s.best[i]))
		}
		for j, v := range w {
			s.best[i][j] = T(v)
		}
	}
	if !(st.Rate > 0) {
		return fmt.Errorf("recipe: the checkpoint's step size %v is not positive", st.Rate)
	}
	s.rate.base, s.out.Sharpness, s.lastLoss = st.Rate, st.Sharpness, st.LastLoss
	s.out.Best, s.since, s.out.Lowered, s.rollbacks, s.cap = st.Best, st.Since, st.Lowered, st.Rollbacks, st.Cap
	s.out.History = append([]Score(nil), st.History...)
	return s.tr.Restore(tr)
}
