package recipe

import (
	"context"
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/data/prep"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/normalize"
	"github.com/rhomb/rhomb/optim"
	"github.com/rhomb/rhomb/optim/modelfile"
)

// Build makes the network a plan describes for the given numbers of
// input features and outputs: a constant-1 feature in place of biases,
// the hidden dense layers each followed by ReLU (with Plan.BatchNorm, by
// batch normalization "norm<i>" and then ReLU), and the readout,
// initialized He-normal with scale ρ0 and wrapped in the plan's weight
// normalization (nil for Plain).
func Build[T net.Float](p Plan, features, outputs int) (*net.Network[T], *normalize.Net[T], error) {
	p = p.filled()
	if err := p.check(); err != nil {
		return nil, nil, err
	}
	b := net.NewBuilder[T](features).ConstantFeature("one")
	for i, w := range p.Hidden {
		id := fmt.Sprint(i + 1)
		b.Dense("hidden"+id, w)
		if p.BatchNorm {
			b.BatchNorm("norm"+id, true, false)
		}
		b.ReLU("relu" + id)
	}
	n, err := b.Readout("readout", outputs).Build()
	if err != nil {
		return nil, nil, err
	}
	if err := n.Init(net.InitSettings{Scheme: net.HeNormal, Rho0: p.Rho0, Seed: p.Seed}); err != nil {
		return nil, nil, err
	}
	o, ok := p.Norm.options()
	if !ok {
		return n, nil, nil
	}
	w, err := normalize.Wrap(n, o)
	if err != nil {
		return nil, nil, err
	}
	return n, w, nil
}

// options is the normalize.Options of a Norm; false for Plain.
func (n Norm) options() (normalize.Options, bool) {
	switch n {
	case Global:
		return normalize.Options{Scale: normalize.Global}, true
	case PerUnit:
		return normalize.Options{PerUnit: true}, true
	case Plain:
		return normalize.Options{}, false
	}
	return normalize.Options{}, true
}

// Fitted is a trained model and how it was trained.
type Fitted[T net.Float] struct {
	Network    *net.Network[T]
	Normalized *normalize.Net[T] // nil for a plain network
	Loss       loss.Func[T]
	// Plan is the plan as run, defaults filled in, with the seed and step
	// factor of the attempt that was kept.
	Plan    Plan
	Outcome Outcome
	// Health holds what is wrong with the chosen model on the validation
	// rows, if anything.
	Health Health
}

// Model is the trained model: the normalized wrapper when there is one.
func (f *Fitted[T]) Model() optim.Model[T] {
	if f.Normalized != nil {
		return f.Normalized
	}
	return f.Network
}

// Fit builds the plan's network and trains it on train with the square
// loss (class-weighted when balance is set), choosing the epoch by the
// validation rows val (nil keeps the last epoch). A run that collapses at
// the start, or diverges before its first epoch ends, is restarted from
// the next seed with half the step factor, at most Plan.Restarts times;
// each restart is noted to obs. The Fitted holds the attempt that was
// kept, its Plan the seed and step factor that attempt ran with.
func Fit[T net.Float](ctx context.Context, train, val *data.Set[T], plan Plan, balance bool, obs *Observer) (*Fitted[T], error) {
	plan = plan.forRows(train.Rows).filled()
	var lf loss.Func[T] = loss.Square[T]{}
	if balance {
		lf = loss.Weighted[T]{Inner: lf, Weights: data.ClassWeights(train.Labels(), max(train.Outputs, 2))}
	}
	for attempt := 0; ; attempt++ {
		n, w, err := Build[T](plan, train.Features, train.Outputs)
		if err != nil {
			return nil, err
		}
		f := &Fitted[T]{Network: n, Normalized: w, Loss: lf, Plan: plan}
		s, err := NewSession(f.Model(), lf, train, val, plan, obs)
		if err != nil {
			return nil, err
		}
		out, err := s.Run(ctx)
		out.Restarts = attempt
		f.Outcome = out
		if diverged, _ := divergence(err); diverged && attempt < plan.Restarts {
			obs.note("the run diverged before its first epoch ended (%v); restarting with seed %d and step factor %.3g", err, plan.Seed+1, plan.StepFactor/2)
			plan.Seed++
			plan.StepFactor /= 2
			if plan.LearningRate > 0 {
				plan.LearningRate /= 2
			}
			continue
		}
		if err != nil {
			return f, err
		}
		if out.Stop == StopCollapsed && attempt < plan.Restarts {
			obs.note("the run collapsed at the start (ρ %.3g after %d epochs, validation accuracy at the majority rate); restarting with seed %d and step factor %.3g",
				n.Rho(), out.Result.Epochs, plan.Seed+1, plan.StepFactor/2)
			plan.Seed++
			plan.StepFactor /= 2
			if plan.LearningRate > 0 {
				plan.LearningRate /= 2
			}
			continue
		}
		if val != nil {
			f.Health = Check(f.Model(), val, val.Classes)
			if plan.Strict && !f.Health.OK() {
				return f, fmt.Errorf("%w: %s", ErrDegenerate, f.Health.Problems[0])
			}
		}
		return f, nil
	}
}

// ErrDegenerate is returned by Fit with Plan.Strict when the chosen model
// fails a Health check.
var ErrDegenerate = errors.New("recipe: the trained model is degenerate")

// Health is what is wrong with a model on labelled rows, in words a user
// can act on.
type Health struct {
	Problems []string
	// Advice says what to try; empty when there are no problems.
	Advice string
}

// OK reports no problems.
func (h Health) OK() bool { return len(h.Problems) == 0 }

func (h Health) String() string {
	if h.OK() {
		return "no problems found"
	}
	return strings.Join(h.Problems, "; ") + ". " + h.Advice
}

// Check looks for a degenerate model on labelled rows: one that predicts a
// single class, scores at or below the majority-class rate, or never
// recognizes a class that has rows (recall 0). classes names the classes
// (nil: by index).
func Check[T net.Float](m optim.Model[T], s *data.Set[T], classes []string) Health {
	e := Evaluate(m, s)
	name := func(k int) string {
		if k < len(classes) {
			return fmt.Sprintf("%q", classes[k])
		}
		return fmt.Sprint(k)
	}
	var h Health
	pred := e.Predicted()
	used := 0
	for _, n := range pred {
		if n > 0 {
			used++
		}
	}
	if used == 1 {
		for k, n := range pred {
			if n > 0 {
				h.Problems = append(h.Problems, fmt.Sprintf("it predicts class %s for every one of the %d validation rows", name(k), e.Rows()))
			}
		}
	}
	if acc, maj := e.Accuracy(), e.Majority(); acc <= maj {
		h.Problems = append(h.Problems, fmt.Sprintf("its validation accuracy %.4f is no better than always answering the most frequent class (%.4f)", acc, maj))
	}
	if used > 1 {
		for k := range e.Classes() {
			if r := e.Recall(k); r == 0 {
				h.Problems = append(h.Problems, fmt.Sprintf("it recognizes none of the %d validation rows of class %s", e.Support(k), name(k)))
			}
		}
	}
	if !h.OK() {
		h.Advice = "Try weighting the classes by their frequency (balance), ranking epochs by balanced accuracy, a search over a few settings, or more epochs"
	}
	return h
}

// Prepared holds a table's rows split, encoded and ready to train on.
type Prepared[T net.Float] struct {
	Pipeline         *prep.Pipeline
	Classes          []string
	Train, Val, Test *data.Set[T] // Val and Test are nil when their fraction is 0
	// Unseen names, for the validation and then the test rows, the first
	// category they hold that no training row has (column, value, file and
	// line), when there is one; those
	// rows are encoded with that category as all zeros (as serving does
	// with prep.Options.ZeroUnseen), so that a rare level the split
	// left out of the training rows does not fail the run.
	Unseen []string
}

// Split says how Prepare divides and encodes a table. rhomb train uses
// Split{Holdout: 0.2, Seed: 1, Prep: prep.Options{Impute: true}}; the zero
// value holds out nothing and refuses missing cells.
type Split struct {
	// Holdout and Test are the fractions of rows held out for validation
	// and for a final test, stratified by class and seeded.
	Holdout, Test float64
	Seed          uint64
	// Prep configures the preprocessing, fitted on the training rows only.
	Prep prep.Options
	// KeepIdentifiers keeps categorical columns whose values are nearly
	// all distinct; false refuses them (ErrIdentifierColumn).
	KeepIdentifiers bool
}

// Prepare splits a table's rows (stratified, seeded), fits the
// preprocessing on the training rows only, and encodes each part.
func Prepare[T net.Float](t *data.Table, s Split) (*Prepared[T], error) {
	classes := t.Classes()
	if err := continuousLabel(t, classes); err != nil {
		return nil, err
	}
	labels, err := data.ClassIndex(t.Labels, classes)
	if err != nil {
		return nil, err
	}
	parts, err := SplitRows(labels, s.Holdout, s.Test, s.Seed)
	if err != nil {
		return nil, err
	}
	if !s.KeepIdentifiers {
		if err := identifierColumn(t, parts[0]); err != nil {
			return nil, err
		}
	}
	pl, err := prep.Fit(t.Columns, parts[0], s.Prep)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", t.Source, err)
	}
	p := &Prepared[T]{Pipeline: pl, Classes: classes}
	sets := make([]*data.Set[T], 3)
	for i, rows := range parts {
		if rows == nil {
			continue
		}
		sets[i], err = data.Encode[T](t, rows, pl, classes)
		if i > 0 && errors.Is(err, prep.ErrUnknownCategory) {
			// A category that only the held-out rows have (a rare level
			// the stratified split put there) must not fail the run: those
			// rows are scored as serving with ZeroUnseen would see
			// them, and the caller is told.
			p.Unseen = append(p.Unseen, unseenWhere(err))
			lenient := *pl
			lenient.ZeroUnseen = true
			sets[i], err = data.Encode[T](t, rows, &lenient, classes)
		}
		if err != nil {
			return nil, err
		}
	}
	p.Train, p.Val, p.Test = sets[0], sets[1], sets[2]
	return p, nil
}

// unseenWhere names the column, value and place of an unknown category.
func unseenWhere(err error) string {
	var fe *prep.FieldError
	if !errors.As(err, &fe) {
		return err.Error()
	}
	where := fmt.Sprintf("column %q, value %q", fe.Field, fe.Value)
	var pe *data.ParseError
	if errors.As(err, &pe) && pe.File != "" && pe.Line > 0 {
		where += fmt.Sprintf(" at %s:%d", pe.File, pe.Line)
	}
	return where
}

// ErrIdentifierColumn is wrapped by Prepare's error for a categorical
// column whose values are nearly all distinct.
var ErrIdentifierColumn = errors.New("the column's values are nearly all distinct")

// IdentifierError names a column refused for its nearly distinct values;
// it wraps ErrIdentifierColumn.
type IdentifierError struct {
	Source, Column string
	Distinct, Rows int // distinct values among the non-missing training rows
}

func (e *IdentifierError) Error() string {
	return fmt.Sprintf("%s: column %q: %v: %d distinct values in %d training rows. It looks like an identifier, a timestamp or free text, which a classifier cannot learn from: leave the column out",
		e.Source, e.Column, ErrIdentifierColumn, e.Distinct, e.Rows)
}

func (e *IdentifierError) Unwrap() error { return ErrIdentifierColumn }

// identifierColumn refuses a categorical column with at least 90% distinct
// values over at least 20 training rows (its non-missing ones): an
// identifier, a timestamp or free text, which one-hot encoding turns into
// one feature per row — nothing a classifier can learn from, and memory
// that grows with rows × distinct values (common practice, no source: the
// thresholds are ours, documented here).
func identifierColumn(t *data.Table, rows []int) error {
	for j := range t.Columns {
		c := &t.Columns[j]
		if c.Kind != data.Categorical {
			continue
		}
		seen := map[string]struct{}{}
		n := 0
		for _, r := range rows {
			if c.Missing != nil && c.Missing[r] {
				continue
			}
			n++
			seen[c.Cat[r]] = struct{}{}
		}
		if n >= 20 && float64(len(seen)) >= 0.9*float64(n) {
			return &IdentifierError{Source: t.Source, Column: c.Name, Distinct: len(seen), Rows: n}
		}
	}
	return nil
}

// ErrContinuousLabel is wrapped by Prepare's error for a label column that
// holds measurements rather than classes.
var ErrContinuousLabel = errors.New("the label column looks like a measurement, not classes")

// continuousLabel refuses a label column whose values are all numbers and
// so many distinct ones that they are a measurement rather than classes:
// more than maxNumericClasses, and either a value that is not a whole
// number or more than one distinct value per ten rows. Numbered classes —
// digits, ratings, a few dozen codes — pass (common practice, no source:
// the threshold is ours, documented here).
func continuousLabel(t *data.Table, classes []string) error {
	if len(classes) <= maxNumericClasses {
		return nil
	}
	fractional := false
	for _, c := range classes {
		v, err := strconv.ParseFloat(strings.TrimSpace(c), 64)
		if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
			return nil // a label that is not a number: classes by name
		}
		fractional = fractional || v != math.Trunc(v)
	}
	if !fractional && len(classes)*10 <= t.Rows {
		return nil
	}
	return fmt.Errorf("%s: column %q: %w: %d distinct numbers in %d rows (%s and %s among them). A classifier needs a few classes: bin the values into ranges first, or check that the right column is named as the label",
		t.Source, t.Label, ErrContinuousLabel, len(classes), t.Rows, classes[0], classes[len(classes)-1])
}

// maxNumericClasses is the most distinct numeric labels that always count
// as classes.
const maxNumericClasses = 20

// SplitRows returns the training, validation and test rows of a labelled
// set, stratified and seeded; the last two are nil when their fraction is 0.
func SplitRows(labels []int, holdout, test float64, seed uint64) ([][]int, error) {
	if !(holdout >= 0 && test >= 0 && holdout+test < 1) {
		return nil, fmt.Errorf("recipe: holdout %v and test %v must be fractions summing to less than 1", holdout, test)
	}
	fr := []float64{1 - holdout - test}
	if holdout > 0 {
		fr = append(fr, holdout)
	}
	if test > 0 {
		fr = append(fr, test)
	}
	parts, err := data.Stratified(labels, fr, seed)
	if err != nil {
		return nil, err
	}
	out := [][]int{parts[0], nil, nil}
	i := 1
	if holdout > 0 {
		out[1] = parts[i]
		i++
	}
	if test > 0 {
		out[2] = parts[i]
	}
	return out, nil
}

// File bundles a fitted model with its preprocessing into a model file's
// contents; training and metrics are the caller's records.
func (f *Fitted[T]) File(p *Prepared[T], label string) *modelfile.Model[T] {
	return &modelfile.Model[T]{Network: f.Network, Normalized: f.Normalized, Pipeline: p.Pipeline, Classes: p.Classes,
		Label: label, Loss: f.Loss.Name()}
}
