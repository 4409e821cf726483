package recipe

import (
	"fmt"
	"math"

	"github.com/rhomb/rhomb/optim"
)

// Metric is what a run ranks its epochs by.
type Metric int

const (
	// Accuracy is the fraction of validation rows classified right.
	Accuracy Metric = iota
	// Balanced is the mean over classes of each class's recall (balanced
	// accuracy): a model that ignores a rare class scores low on it.
	Balanced
	// MacroF1 is the mean over classes of each class's F1.
	MacroF1
	// AUC is the area under the ROC curve of the model's score, for two
	// classes only: it ranks the scores, not the answers at one threshold.
	AUC
)

func (m Metric) String() string {
	switch m {
	case Accuracy:
		return "accuracy"
	case Balanced:
		return "balanced-accuracy"
	case MacroF1:
		return "macro-f1"
	case AUC:
		return "auc"
	}
	return fmt.Sprintf("Metric(%d)", int(m))
}

// ParseMetric reads the names String gives (and "balanced").
func ParseMetric(s string) (Metric, error) {
	switch s {
	case "accuracy":
		return Accuracy, nil
	case "balanced-accuracy", "balanced":
		return Balanced, nil
	case "macro-f1":
		return MacroF1, nil
	case "auc":
		return AUC, nil
	}
	return 0, fmt.Errorf("metric %q: want accuracy, balanced, macro-f1 or auc", s)
}

// Norm is the weight normalization a Plan builds.
type Norm int

const (
	// PerLayer splits every dense layer into ρ_k·V_k (the zero value).
	PerLayer Norm = iota
	// Global keeps one scale ρ for the whole network.
	Global
	// PerUnit gives every unit of every layer its own scale.
	PerUnit
	// Plain trains the weights W directly.
	Plain
)

func (n Norm) String() string {
	switch n {
	case PerLayer:
		return "layer"
	case Global:
		return "global"
	case PerUnit:
		return "unit"
	case Plain:
		return "none"
	}
	return fmt.Sprintf("Norm(%d)", int(n))
}

// Plan is how a model is trained. Every zero field means the default the
// benchmark suite chose (internal/checks, TestSuite; the table is in the
// README), so Plan{} is the recommended starting point. Defaults holds
// them all, filled in.
type Plan struct {
	// Hidden are the hidden layers' widths; nil means Defaults().Hidden.
	// An empty non-nil slice gives a linear model.
	Hidden []int
	// Rho0 is the initial scale ρ0 = ∏‖W_k‖; zero means the default.
	Rho0 float64
	// Norm is the weight normalization.
	Norm Norm
	// BatchNorm puts batch normalization with a learned per-unit scale
	// (no shift) after each hidden dense layer, before its ReLU. It needs
	// Norm = Plain: it makes a layer's output independent of the scale of
	// its weights, so a weight-normalized scale would get no gradient.
	BatchNorm bool
	// Batch is the rows per step; zero means the default, and a batch
	// larger than the training set is the whole set.
	Batch int
	// Momentum μ of the heavy-ball update; zero means the default, a
	// negative value none.
	Momentum float64
	// Decay is the weight decay λ (on the scales ρ_k of a normalized
	// network); zero means the default, a negative value none.
	Decay float64
	// LearningRate, when positive, fixes the base step size η and skips
	// the curvature estimate.
	LearningRate float64
	// StepFactor sets η = StepFactor × the stability threshold measured on
	// a training batch (see StepSize); zero means the default.
	StepFactor float64
	// Warmup is the epochs over which η rises linearly from η/10 to η;
	// zero means the default, negative none.
	Warmup int
	// Floor is the fraction of η the cosine decay reaches at the last
	// epoch; zero means the default, negative a constant rate after the
	// warm-up.
	Floor float64
	// Epochs is the most epochs the run takes. Zero means the default, or
	// on a small training set as many more as make MinSteps steps, and on a
	// large one as many fewer as keep the run within MaxSteps steps.
	Epochs int
	// Patience ends the run after this many epochs without a better
	// validation score. Zero means the default, or on a small training set
	// as many more as make PatienceSteps steps; negative never.
	Patience int
	// Metric ranks the epochs on the validation rows; ties go to the
	// larger minimum normalized margin.
	Metric Metric
	// Seed selects the initialization, batch order and noise.
	Seed uint64
	// Restarts is how many times Fit restarts a run that collapsed at the
	// start, each time from the next seed with half the step factor; zero
	// means the default, negative never.
	Restarts int
	// Temperature, Nesterov, Sampling and TargetLoss are passed to the
	// trainer as they are (see optim.Settings); their zero values are the
	// defaults.
	Temperature float64
	Nesterov    bool
	Sampling    optim.Sampling
	TargetLoss  float64
	// Schedule, when set, replaces the warm-up and cosine: the step size
	// is η × Schedule.Factor.
	Schedule optim.Schedule
	// Strict makes a degenerate model an error (ErrDegenerate) instead of
	// a warning.
	Strict bool

	// resolved marks a plan whose defaults are filled in: a 0 in it then
	// means "none" (a negative field resolved), not "the default", so
	// filling it again must change nothing.
	resolved bool
}

// Defaults returns the plan that Plan{} means, every field filled in.
//
// How they were chosen: the benchmark suite (internal/checks/suite_test.go)
// trains every open dataset of the suite with these settings and with a
// 36-point grid around them, beside a tuned logistic regression; the
// README holds the table. Change a default only with that table beside it.
func Defaults() Plan {
	return Plan{
		Hidden:     []int{64, 64},
		Rho0:       0.1,
		Norm:       PerLayer,
		Batch:      32,
		Momentum:   0.9,
		Decay:      1e-4,
		StepFactor: 0.05,
		Warmup:     2,
		Floor:      0.01,
		Epochs:     100,
		Patience:   15,
		Metric:     Accuracy,
		Restarts:   2,
	}
}

// A small training set has few steps per epoch, and a run counted in
// epochs would stop before it has learned anything: the defaults of
// Epochs and Patience stretch to at least MinSteps and PatienceSteps
// steps. A large one has many, and the default Epochs shrinks to keep the
// run within MaxSteps: on the 48,000 Fashion-MNIST training images at
// batch 32, 40 epochs instead of 100, which took 4.7 minutes on two cores
// and reached 0.893 test accuracy with hidden 256,128, where 100 epochs
// took 11 minutes for 0.899 (README, "How the defaults were chosen"). No
// dataset of the benchmark suite reaches the cap (the largest run there
// is 20,000 steps), so the suite's table is the same with it.
const (
	MinSteps      = 3000
	PatienceSteps = 600
	MaxSteps      = 60000
)

// Resolved returns the plan a session runs on a training set of the given
// rows: every zero field set to its default, Epochs and Patience
// stretched for small sets.
func (p Plan) Resolved(trainRows int) Plan { return p.forRows(trainRows).filled() }

// forRows sets a zero Epochs and Patience for a training set of the given
// rows: the defaults, stretched to MinSteps and PatienceSteps steps.
func (p Plan) forRows(rows int) Plan {
	if p.resolved {
		return p
	}
	d := Defaults()
	batch := p.Batch
	if batch == 0 {
		batch = d.Batch
	}
	perEpoch := max((rows+batch-1)/max(batch, 1), 1)
	stretch := func(epochs, steps int) int { return max(epochs, (steps+perEpoch-1)/perEpoch) }
	if p.Epochs == 0 {
		p.Epochs = stretch(d.Epochs, MinSteps)
		if p.Epochs*perEpoch > MaxSteps {
			p.Epochs = max(MaxSteps/perEpoch, 1)
		}
	}
	if p.Patience == 0 {
		p.Patience = stretch(d.Patience, PatienceSteps)
	}
	return p
}

// filled returns p with every zero field set to its default.
func (p Plan) filled() Plan {
	if p.resolved {
		return p
	}
	d := Defaults()
	if p.Hidden == nil {
		p.Hidden = d.Hidden
	}
	set := func(v *float64, def float64) {
		switch {
		case *v == 0:
			*v = def
		case *v < 0:
			*v = 0
		}
	}
	seti := func(v *int, def int) {
		switch {
		case *v == 0:
			*v = def
		case *v < 0:
			*v = 0
		}
	}
	if p.Rho0 == 0 {
		p.Rho0 = d.Rho0
	}
	if p.Batch == 0 {
		p.Batch = d.Batch
	}
	set(&p.Momentum, d.Momentum)
	set(&p.Decay, d.Decay)
	if p.StepFactor == 0 {
		p.StepFactor = d.StepFactor
	}
	seti(&p.Warmup, d.Warmup)
	set(&p.Floor, d.Floor)
	if p.Floor == 0 {
		p.Floor = 1 // a negative Floor: no decay
	}
	if p.Epochs == 0 {
		p.Epochs = d.Epochs
	}
	seti(&p.Patience, d.Patience)
	seti(&p.Restarts, d.Restarts)
	p.resolved = true
	return p
}

// check reports the first field that cannot be used, in the Plan's words.
func (p Plan) check() error {
	bad := func(field string, v any, want string) error {
		return fmt.Errorf("recipe: Plan.%s = %v; %s", field, v, want)
	}
	finite := func(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
	for _, w := range p.Hidden {
		if w < 1 {
			return bad("Hidden", p.Hidden, "want positive widths")
		}
	}
	switch {
	case !(p.Rho0 > 0) || !finite(p.Rho0):
		return bad("Rho0", p.Rho0, "want a positive initial scale")
	case p.Norm < PerLayer || p.Norm > Plain:
		return bad("Norm", p.Norm, "want PerLayer, Global, PerUnit or Plain")
	case p.BatchNorm && p.Norm != Plain:
		return bad("Norm", p.Norm, "want Plain with BatchNorm: batch normalization makes a layer's scale irrelevant")
	case p.Batch < 1:
		return bad("Batch", p.Batch, "want a positive number of rows")
	case !(p.Momentum < 1) || !finite(p.Momentum):
		return bad("Momentum", p.Momentum, "want μ < 1")
	case !finite(p.Decay):
		return bad("Decay", p.Decay, "want a finite λ")
	case p.LearningRate < 0 || !finite(p.LearningRate):
		return bad("LearningRate", p.LearningRate, "want 0 (measured) or a positive step size")
	case !(p.StepFactor > 0 && p.StepFactor <= 1):
		return bad("StepFactor", p.StepFactor, "want a fraction in (0, 1] of the stability threshold")
	case !(p.Floor > 0 && p.Floor <= 1):
		return bad("Floor", p.Floor, "want a fraction in (0, 1] of η")
	case p.Epochs < 1:
		return bad("Epochs", p.Epochs, "want at least 1")
	case p.Metric < Accuracy || p.Metric > AUC:
		return bad("Metric", p.Metric, "want Accuracy, Balanced, MacroF1 or AUC")
	}
	return nil
}
