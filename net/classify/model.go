package classify

import (
	"errors"
	"fmt"
	"math"
	"time"

	"github.com/rhomb/rhomb/data/prep"
	"github.com/rhomb/rhomb/internal/arith"
	"github.com/rhomb/rhomb/net/schema"
)

// Model is a loaded classifier: its layers, its preprocessing and its
// class names. It never changes after Read, so any number of goroutines
// may classify with one Model at once, each with its own Work.
type Model struct {
	info         Info
	layers       []layer
	features     int // width of a feature row, the network's input
	outputs      int
	maxWidth     int
	dtype        string
	pipeline     *prep.Pipeline // nil: the inputs are features already
	inputs       []string       // the pipeline's input fields
	featureNames []string
	classes      []string
	// decision is how scores become an answer (nil: arg-max, threshold
	// 0); rho = ∏‖W_k‖_F over the dense layers, for normalized margins.
	decision *schema.Decision
	rho      float64
}

// Info describes a model: where it came from and what it takes and gives.
type Info struct {
	// Version identifies the file's contents: the first 16 hex digits of
	// its SHA-256 checksum, which changes with any change to the model.
	Version string `json:"version"`
	SHA256  string `json:"sha256"`
	Source  string `json:"source"`
	Library string `json:"library"` // the rhomb release that wrote it
	// Created is when the file was written (zero when the header has no
	// valid time).
	Created  time.Time `json:"created"`
	DType    string    `json:"dtype"` // element type of the stored weights
	Features int       `json:"features"`
	Outputs  int       `json:"outputs"`
	// Inputs names the raw input fields, in order; nil when the model has
	// no preprocessing and takes feature vectors only.
	Inputs  []string `json:"inputs,omitempty"`
	Classes []string `json:"classes,omitempty"`
	Label   string   `json:"label,omitempty"`
	Loss    string   `json:"loss,omitempty"`
	// Normalization is the scale mode the model was trained with
	// ("global", "per-layer"), or "" for plain weights. Prediction uses the
	// stored W either way.
	Normalization string         `json:"normalization,omitempty"`
	Graph         []Node         `json:"graph"`
	Metrics       map[string]any `json:"metrics,omitempty"`
	// Checkpoint reports that the file also holds trainer state, which
	// this package ignores.
	Checkpoint bool `json:"checkpoint,omitempty"`
}

// Node is one step of the network, for Info.
type Node struct {
	Name    string `json:"name"`
	Kind    string `json:"kind"`
	In, Out int    `json:"-"`
}

// Info returns the model's description. The slices and map are the
// model's own: do not modify them.
func (m *Model) Info() Info { return m.info }

// Classes returns the class names in output order (for one ±1 output, the
// class encoded −1 first), or nil when the file names none. The slice is
// the model's own.
func (m *Model) Classes() []string { return m.classes }

// Features is the width of a feature row, the network's input.
func (m *Model) Features() int { return m.features }

// Outputs is the number of network outputs: 1 for a ±1 binary model, the
// number of classes otherwise.
func (m *Model) Outputs() int { return m.outputs }

// Inputs returns the names of the raw input fields in the order
// ClassifyFields expects them, or nil for a model without preprocessing.
// The slice is the model's own.
func (m *Model) Inputs() []string { return m.inputs }

// FeatureNames names every feature, as prep.Pipeline.FeatureNames does
// ("x0", "x1", … for a model without preprocessing). The slice is the
// model's own.
func (m *Model) FeatureNames() []string { return m.featureNames }

// Scale returns ρ = ∏‖W_k‖_F over the dense layers, the scale that
// normalized margins (Answer.Margin) are divided by.
func (m *Model) Scale() float64 { return m.rho }

// Decision returns how the model turns scores into answers (threshold,
// calibration, prediction sets, reject option), or nil for the plain
// rule. It is the model's own and must not be modified.
func (m *Model) Decision() *schema.Decision { return m.decision }

// Pipeline returns the model's preprocessing, or nil. It is the model's
// own and must not be modified.
func (m *Model) Pipeline() *prep.Pipeline { return m.pipeline }

// Answer is the verdict on one row.
type Answer struct {
	// Class is the index of the predicted class: for one output, 1 when
	// the score is positive and 0 otherwise; for several, the first output
	// of the largest score. It is the training library's rule
	// (data.ClassOf).
	Class int
	// Label is Classes()[Class], or "" when the model names no classes.
	Label string
	// Scores are the network's outputs, bit for bit: one per class, or one
	// signed score for a ±1 binary model. The slice belongs to the Work
	// and is overwritten by its next use; copy it to keep it.
	Scores []float64
	// Margin is the row's normalized margin: how far its scores are from
	// a different answer (the largest score minus the second; for one
	// signed score, its distance from the threshold), divided by
	// ρ = ∏‖W_k‖_F over the dense layers.
	Margin float64
	// Probabilities are the calibrated class probabilities, one per class
	// (two for a model with one signed score), when the model file holds
	// a calibration; nil otherwise. They belong to the Work.
	Probabilities []float64
	// Set is the split-conformal prediction set, the indices of the
	// classes in it in increasing order, when the model file holds one;
	// nil otherwise. It is never empty: when no class is likely enough,
	// it holds the most probable one (arith.PredictionSet). It belongs to
	// the Work.
	Set []int
	// Abstained reports that the model declines to answer this row: its
	// normalized margin is below the floor fitted for the model's target
	// error rate. Class and Label still say what the answer would be.
	Abstained bool
}

// Work holds the buffers one goroutine needs to classify: a Work may not
// be used by two goroutines at once, but a Model may. After its first use
// at a given batch size, classifying with it allocates nothing.
type Work struct {
	m      *Model
	feat   []float64 // one encoded row
	a, b   []float64 // layer outputs, float64 models
	x32    []float32 // the row, float32 models
	a32    []float32 // layer outputs, float32 models
	b32    []float32
	scores []float64 // batch outputs
	probs  []float64 // batch probabilities
	sets   []int     // batch prediction sets
	cols   []prep.Column
	num    []float64 // backing for cols
	cat    []string
	miss   []bool
}

// NewWork returns buffers sized for m.
func (m *Model) NewWork() *Work {
	w := &Work{m: m, feat: make([]float64, m.features)}
	if m.dtype == "float32" {
		w.x32 = make([]float32, m.features)
		w.a32 = make([]float32, m.maxWidth)
		w.b32 = make([]float32, m.maxWidth)
	} else {
		w.a = make([]float64, m.maxWidth)
		w.b = make([]float64, m.maxWidth)
	}
	return w
}

func (m *Model) work(w *Work) *Work {
	if w == nil {
		return m.NewWork()
	}
	if w.m != m {
		panic("classify: a Work made by one Model used with another; call NewWork on this Model")
	}
	return w
}

// Errors of rows, carried by *prep.FieldError (single rows) or *RowError
// (batches) and found with errors.Is. Raw feature vectors report NaN and
// infinite features with prep's sentinels (prep.ErrNotNumber,
// prep.ErrInfinite) and a wrong width with prep.ErrRagged, so that a
// caller tests one set of sentinels whatever the input path.
var (
	// ErrNoPipeline: the model has no preprocessing, so it takes feature
	// vectors only.
	ErrNoPipeline = errors.New("classify: the model has no preprocessing pipeline; give feature vectors")
	// ErrOutput: the network's output is NaN or infinite (inputs far
	// outside the training range can overflow a polynomial layer).
	ErrOutput = errors.New("classify: the network's output is not finite")
)

// RowError reports which row of a batch failed. Err is usually a
// *prep.FieldError naming the field.
type RowError struct {
	Row int // from 0, in the batch
	Err error
}

func (e *RowError) Error() string { return fmt.Sprintf("classify: row %d: %v", e.Row, e.Err) }
func (e *RowError) Unwrap() error { return e.Err }

// checkVector refuses a feature vector of the wrong width or with a NaN
// or infinite value, naming the feature.
func (m *Model) checkVector(x []float64) error {
	if len(x) != m.features {
		return &prep.FieldError{Row: -1, Err: fmt.Errorf("%w: %d features, the model takes %d", prep.ErrRagged, len(x), m.features)}
	}
	for i, v := range x {
		switch {
		case math.IsNaN(v):
			return &prep.FieldError{Field: m.featureNames[i], Row: -1, Value: "NaN", Err: prep.ErrNotNumber}
		case math.IsInf(v, 0):
			return &prep.FieldError{Field: m.featureNames[i], Row: -1, Value: infText(v), Err: prep.ErrInfinite}
		}
	}
	return nil
}

func infText(v float64) string {
	if v > 0 {
		return "+Inf"
	}
	return "-Inf"
}

// finish runs the network on w.feat-like row x and writes its outputs
// into dst.
func (m *Model) run(w *Work, x, dst []float64, row int) (Answer, error) {
	m.scores(w, x, dst)
	return m.answer(w, dst, row)
}

func (m *Model) answer(w *Work, s []float64, row int) (Answer, error) {
	for _, v := range s {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return Answer{}, ErrOutput
		}
	}
	d := m.decision
	threshold := 0.0
	if d != nil && d.Threshold != nil {
		threshold = *d.Threshold
	}
	c := arith.Decide(s, threshold)
	a := Answer{Class: c, Scores: s, Margin: arith.Gap(s, threshold)}
	if m.rho > 0 {
		a.Margin /= m.rho
	}
	if m.classes != nil {
		a.Label = m.classes[c]
	}
	if d == nil {
		return a, nil
	}
	if cal := d.Calibration; cal != nil {
		k := max(len(s), 2)
		p := w.probs[row*k : (row+1)*k]
		if len(s) == 1 {
			p[1] = arith.Sigmoid(cal.A*s[0] + cal.B)
			p[0] = 1 - p[1]
		} else {
			arith.Softmax(s, cal.Temperature, p)
		}
		a.Probabilities = p
		if sets := d.Sets; sets != nil {
			a.Set = arith.PredictionSet(p, sets.Quantile, w.sets[row*k:row*k])
		}
	}
	if ab := d.Abstain; ab != nil && a.Margin < ab.MarginFloor {
		a.Abstained = true
	}
	return a, nil
}

// one returns the Work's single-row output buffer.
func (w *Work) one() []float64 {
	w.grow(1)
	return w.scores[:w.m.outputs]
}

func (w *Work) grow(rows int) {
	if n := rows * w.m.outputs; len(w.scores) < n {
		w.scores = make([]float64, n)
	}
	if d := w.m.decision; d != nil && d.Calibration != nil {
		if n := rows * max(w.m.outputs, 2); len(w.probs) < n {
			w.probs = make([]float64, n)
			w.sets = make([]int, n)
		}
	}
}

// ClassifyVector classifies one feature vector (len Features). A wrong
// width, NaN or infinity is a *prep.FieldError naming the feature. A nil
// w allocates a Work for the call.
func (m *Model) ClassifyVector(w *Work, x []float64) (Answer, error) {
	w = m.work(w)
	if err := m.checkVector(x); err != nil {
		return Answer{}, err
	}
	return m.run(w, x, w.one(), 0)
}

// ClassifyFields classifies one row of raw cells, one per input field in
// the order of Inputs, through the model's pipeline
// (prep.Pipeline.ApplyStrings). Errors are *prep.FieldError naming the
// field: missing value, not a number, infinite, unknown category, wrong
// number of fields.
func (m *Model) ClassifyFields(w *Work, fields []string) (Answer, error) {
	w = m.work(w)
	if m.pipeline == nil {
		return Answer{}, ErrNoPipeline
	}
	if err := m.pipeline.ApplyStrings(fields, w.feat); err != nil {
		return Answer{}, err
	}
	return m.run(w, w.feat, w.one(), 0)
}

// ClassifyMap classifies one row of raw cells by field name
// (prep.Pipeline.ApplyMap): an absent field is missing, and a name that is
// no input is an error, so that a misspelt field is never taken for a
// missing one.
func (m *Model) ClassifyMap(w *Work, fields map[string]string) (Answer, error) {
	w = m.work(w)
	if m.pipeline == nil {
		return Answer{}, ErrNoPipeline
	}
	if err := m.pipeline.ApplyMap(fields, w.feat); err != nil {
		return Answer{}, err
	}
	return m.run(w, w.feat, w.one(), 0)
}

// ClassifyVectors classifies rows feature vectors held row-major in x
// (rows×Features) and writes one Answer per row into dst (len ≥ rows).
// The answers' Scores share one buffer of the Work. The first bad row
// stops the batch with a *RowError; dst then holds the rows before it.
func (m *Model) ClassifyVectors(w *Work, x []float64, rows int, dst []Answer) error {
	w = m.work(w)
	if len(x) != rows*m.features || len(dst) < rows {
		return &RowError{Row: -1, Err: &prep.FieldError{Row: -1, Err: fmt.Errorf("%w: %d values for %d rows of %d features, %d answers", prep.ErrRagged, len(x), rows, m.features, len(dst))}}
	}
	w.grow(rows)
	o := m.outputs
	for r := range rows {
		row := x[r*m.features : (r+1)*m.features]
		if err := m.checkVector(row); err != nil {
			return &RowError{Row: r, Err: err}
		}
		a, err := m.run(w, row, w.scores[r*o:(r+1)*o], r)
		if err != nil {
			return &RowError{Row: r, Err: err}
		}
		dst[r] = a
	}
	return nil
}

// ClassifyMaps classifies a batch of rows by field name, as ClassifyMap
// does each, writing one Answer per row into dst (len ≥ len(rows)).
func (m *Model) ClassifyMaps(w *Work, rows []map[string]string, dst []Answer) error {
	w = m.work(w)
	if m.pipeline == nil {
		return ErrNoPipeline
	}
	if len(dst) < len(rows) {
		return &RowError{Row: -1, Err: fmt.Errorf("classify: %d answers for %d rows", len(dst), len(rows))}
	}
	w.grow(len(rows))
	o := m.outputs
	for r, fields := range rows {
		if err := m.pipeline.ApplyMap(fields, w.feat); err != nil {
			return &RowError{Row: r, Err: err}
		}
		a, err := m.run(w, w.feat, w.scores[r*o:(r+1)*o], r)
		if err != nil {
			return &RowError{Row: r, Err: err}
		}
		dst[r] = a
	}
	return nil
}
