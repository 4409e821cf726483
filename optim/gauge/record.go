package gauge

import (
	"errors"
	"math"
	"slices"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/optim"
)

// StepRecord is what a Recorder keeps of one step: the trainer's values
// (taken before the step's update, as optim.StepInfo documents) and the
// equilibrium detector's state after seeing them.
type StepRecord struct {
	Step, Epoch  int
	LearningRate float64
	Loss         float64 // minibatch data loss
	Objective    float64 // data + decay + multiplier terms
	Rho          float64
	RhoStar      float64 // NaN for a loss without one
	Gap          float64 // |ρ − ρ*|/ρ*
	RhoDot       float64
	LayerRho     []float64 // ρ_k
	DirSpeed     []float64 // ‖V̇_k‖
	Speed        float64   // √Σ_k ‖V̇_k‖²
	// BatchMarginMin and BatchMarginMean summarize the minibatch's
	// normalized margins.
	BatchMarginMin, BatchMarginMean float64
	AtEquilibrium                   bool
}

// Record is what a Recorder keeps of one epoch. The whole-set measures are
// taken on the weights at the end of the epoch; a pointer or slice is nil
// when its measure was not asked for, and a float NaN when it does not
// apply.
type Record struct {
	Epoch   int // from 0
	Steps   int // steps taken so far in the run
	Seconds float64
	Loss    float64 // mean minibatch data loss over the epoch
	Rho     float64 // ρ at the end of the epoch
	// RhoStarMean and GapMean average the minibatch ρ* and the relative gap
	// over the epoch's steps (the minibatch ρ* is noisy; its epoch mean is
	// the steadier figure to plot beside ρ). SpeedMean averages ‖V̇‖.
	RhoStarMean, GapMean, SpeedMean float64
	// LayerRho and DirSpeed are those of the epoch's last step.
	LayerRho, DirSpeed []float64
	Equilibrium        EquilibriumState // after the epoch's last step

	Train, Test           *MarginReport
	TrainError, TestError float64 // fraction of rows with margin ≤ 0
	Collapse              *CollapseReport
	Spectra               []Spectrum
	Bound                 *BoundReport
}

// History is a run as a Recorder saw it, in the order things happened.
// Plots, reports and sweeps read it after Run returns.
type History struct {
	Steps  []StepRecord
	Epochs []Record
	// Criterion is the equilibrium criterion used; EquilibriumStep the step
	// at which it first held, 0 if it never did.
	Criterion       EquilibriumOptions
	EquilibriumStep int
}

// Last returns the last epoch's record, or nil before the first epoch.
func (h *History) Last() *Record {
	if len(h.Epochs) == 0 {
		return nil
	}
	return &h.Epochs[len(h.Epochs)-1]
}

// RecorderOptions chooses what a Recorder measures. The zero value records
// every step and, at every epoch, the trainer's own values only; each
// whole-set measure is opt-in because it costs a forward pass over a set.
type RecorderOptions[T net.Float] struct {
	// Model is the model being trained; it is needed by every whole-set
	// measure below.
	Model Model[T]
	// Train and Test are the sets the epoch measures run on. Train margins
	// are computed when Train is set, test margins and error when Test is.
	Train, Test *data.Set[T]
	// StepEvery keeps a StepRecord every that many steps: zero means every
	// step, negative none. The equilibrium detector sees every step either
	// way.
	StepEvery int
	// EpochEvery takes the whole-set measures every that many epochs (and
	// at the first); zero means every epoch.
	EpochEvery int
	// Margins configures the margin reports (fix Margins.Edges to compare
	// histograms across epochs).
	Margins MarginOptions
	// Collapse computes the neural-collapse measures on Train at the output
	// of FeatureNode (empty: the readout's input).
	Collapse    bool
	FeatureNode string
	// Spectra computes every layer's singular values.
	Spectra bool
	// Bound, when not nil, computes the margin bound on Train with these
	// options, with the test error beside it when Test is set.
	Bound *BoundOptions
	// Equilibrium is the criterion; Stop in it ends the run when it holds.
	Equilibrium EquilibriumOptions
}

// Recorder fills a History from a run's hooks. Make one with NewRecorder,
// pass Hooks() in optim.Settings, and read History() afterwards.
type Recorder[T net.Float] struct {
	o    RecorderOptions[T]
	eq   *Equilibrium
	h    History
	last *optim.StepInfo // scratch copy of the epoch's last step (slices owned here)

	sumStar, sumGap, sumSpeed float64
	nStar, nGap, nSteps       int
}

// ErrNoModel is returned by NewRecorder when a whole-set measure is asked
// for without RecorderOptions.Model.
var ErrNoModel = errors.New("gauge: RecorderOptions asks for whole-set measures but has no Model")

// NewRecorder checks the options and returns a Recorder.
func NewRecorder[T net.Float](o RecorderOptions[T]) (*Recorder[T], error) {
	wants := o.Train != nil || o.Test != nil || o.Collapse || o.Spectra || o.Bound != nil
	if wants && o.Model == nil {
		return nil, ErrNoModel
	}
	if (o.Collapse || o.Bound != nil) && o.Train == nil {
		return nil, errors.New("gauge: RecorderOptions.Collapse and Bound need the Train set")
	}
	r := &Recorder[T]{o: o, eq: NewEquilibrium(o.Equilibrium), last: &optim.StepInfo{}}
	r.h.Criterion = r.eq.Options()
	return r, nil
}

// Hooks returns hooks that feed the Recorder. To combine them with other
// hooks, call Step and Epoch from your own.
func (r *Recorder[T]) Hooks() *optim.Hooks {
	return &optim.Hooks{Step: r.Step, Epoch: r.Epoch}
}

// History returns the record so far. It is the Recorder's own: do not
// modify it while the run goes on.
func (r *Recorder[T]) History() *History { return &r.h }

// Step records one step; it is an optim.Hooks.Step function.
func (r *Recorder[T]) Step(s *optim.StepInfo) error {
	st := r.eq.Observe(s)
	if st.Reached && r.h.EquilibriumStep == 0 {
		r.h.EquilibriumStep = s.Step
	}
	if !math.IsNaN(s.RhoStar) {
		r.sumStar += s.RhoStar
		r.nStar++
	}
	if !math.IsNaN(st.Gap) {
		r.sumGap += st.Gap
		r.nGap++
	}
	r.sumSpeed += st.Speed
	r.nSteps++
	r.last.Rho, r.last.RhoStar = s.Rho, s.RhoStar
	r.last.LayerRho = append(r.last.LayerRho[:0], s.LayerRho...)
	r.last.DirSpeed = append(r.last.DirSpeed[:0], s.DirSpeed...)

	every := r.o.StepEvery
	if every == 0 {
		every = 1
	}
	if every > 0 && s.Step%every == 0 {
		r.h.Steps = append(r.h.Steps, StepRecord{
			Step: s.Step, Epoch: s.Epoch, LearningRate: s.LearningRate,
			Loss: s.Loss.Data, Objective: s.Loss.Total,
			Rho: s.Rho, RhoStar: s.RhoStar, Gap: st.Gap, RhoDot: s.RhoDot,
			LayerRho: slices.Clone(s.LayerRho), DirSpeed: slices.Clone(s.DirSpeed), Speed: st.Speed,
			BatchMarginMin: s.Margins.Min, BatchMarginMean: s.Margins.Mean,
			AtEquilibrium: st.Reached,
		})
	}
	if st.Reached && r.o.Equilibrium.Stop {
		return optim.ErrStop
	}
	return nil
}

// Epoch records one epoch, taking the whole-set measures the options ask
// for; it is an optim.Hooks.Epoch function.
func (r *Recorder[T]) Epoch(e *optim.EpochInfo) error {
	nan := math.NaN()
	rec := Record{
		Epoch: e.Epoch, Steps: e.Steps, Seconds: e.Elapsed.Seconds(), Loss: e.Loss, Rho: e.Rho,
		RhoStarMean: mean(r.sumStar, r.nStar), GapMean: mean(r.sumGap, r.nGap), SpeedMean: mean(r.sumSpeed, r.nSteps),
		LayerRho: slices.Clone(r.last.LayerRho), DirSpeed: slices.Clone(r.last.DirSpeed),
		Equilibrium: r.eq.Last(), TrainError: nan, TestError: nan,
	}
	r.sumStar, r.sumGap, r.sumSpeed, r.nStar, r.nGap, r.nSteps = 0, 0, 0, 0, 0, 0
	every := max(r.o.EpochEvery, 1)
	if e.Epoch%every == 0 {
		if err := r.measure(&rec); err != nil {
			return err
		}
	}
	r.h.Epochs = append(r.h.Epochs, rec)
	return nil
}

// Measure takes the whole-set measures now, outside any hook: after Run,
// say, to be sure the final weights are measured whatever EpochEvery is.
// The trainer's values in the returned record are NaN.
func (r *Recorder[T]) Measure() (Record, error) {
	nan := math.NaN()
	rec := Record{Epoch: -1, Loss: nan, Rho: nan, RhoStarMean: nan, GapMean: nan, SpeedMean: nan, TrainError: nan, TestError: nan, Equilibrium: r.eq.Last()}
	if r.o.Model != nil {
		rec.Rho = r.o.Model.Base().Rho()
	}
	return rec, r.measure(&rec)
}

func (r *Recorder[T]) measure(rec *Record) error {
	o := r.o
	var err error
	if o.Train != nil {
		if rec.Train, err = MarginsOf(o.Model, o.Train, o.Margins); err != nil {
			return err
		}
		rec.TrainError = float64(rec.Train.All.Errors) / float64(rec.Train.All.Rows)
	}
	if o.Test != nil {
		if rec.Test, err = MarginsOf(o.Model, o.Test, o.Margins); err != nil {
			return err
		}
		rec.TestError = float64(rec.Test.All.Errors) / float64(rec.Test.All.Rows)
	}
	if o.Collapse {
		if rec.Collapse, err = CollapseOf(o.Model, o.Train, o.FeatureNode); err != nil {
			return err
		}
	}
	if o.Spectra {
		if rec.Spectra, err = Spectra(o.Model); err != nil {
			return err
		}
	}
	if o.Bound != nil {
		if rec.Bound, err = BoundOf(o.Model, o.Train, nil, *o.Bound); err != nil {
			return err
		}
		rec.Bound.TestError = rec.TestError
	}
	return nil
}

func mean(sum float64, n int) float64 {
	if n == 0 {
		return math.NaN()
	}
	return sum / float64(n)
}
