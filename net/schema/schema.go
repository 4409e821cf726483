// Package schema is rhomb's model file format (docs/model-file.md),
// declared once: the header and its node, normalization and checkpoint
// records, the names of node kinds, tensor roles and element types, the
// limits, the one error type, and Parse, which checks everything a reader
// must check before it builds anything. Every reader and writer of model
// files decodes these types: the training library's reader and writer
// (package optim/modelfile), the serving reader (package net/classify, used
// by the command-line tool, the HTTP server and the edge program) and the
// ONNX exporter. So the two readers accept exactly the same files, and a
// change to the format is made here, once.
//
// It imports only the standard library and rhomb's internal, standard-
// library-only container layer and arithmetic, so that the serving side
// stays small.
package schema

import (
	"encoding/json"
	"fmt"

	"github.com/rhomb/rhomb/internal/container"
)

// The layout and the limits (see docs/model-file.md).
const (
	Magic   = container.Magic
	Version = container.Version
	// OldestVersion is the oldest format version the readers accept.
	OldestVersion = container.OldestVersion
	PrefixLen     = container.PrefixLen
	SumLen        = container.SumLen
	// Format is the header's "format" field in every model file.
	Format     = container.Format
	MaxHeader  = container.MaxHeader
	MaxTensors = container.MaxTensors
	MaxNodes   = container.MaxNodes
	// MaxFitCost caps Σ(d+1)² over the graph's poly-relu nodes, so that a
	// hostile header cannot buy unbounded fitting work.
	MaxFitCost = container.MaxFitCost
)

// Node kinds: the "kind" of a graph node.
const (
	KindConstantOne = "constant-one" // appends a constant feature 1 (first node only)
	KindDense       = "dense"        // y = W·x, W of shape [units, in]
	KindReadout     = "readout"      // the last dense layer
	KindReLU        = "relu"         // max(x, 0)
	KindSmoothReLU  = "smooth-relu"  // log(1 + e^{βx})/β
	KindPolyReLU    = "poly-relu"    // a Chebyshev fit of ReLU on [lo, hi]
	KindBatchNorm   = "batch-norm"   // γ·(x − mean)/√(var + ε) + β per unit, with stored running statistics
)

// Polynomial fits: the "fit" of a poly-relu node.
const (
	FitLeastSquares  = "least-squares"
	FitInterpolation = "interpolation"
)

// Element types: the header's "dtype" and a tensor's.
const (
	Float32 = "float32"
	Float64 = "float64"
	Int32   = "int32"
)

// Tensor roles.
const (
	RoleWeight   = "weight"   // W of a dense layer: all a reader needs to predict
	RoleParam    = "param"    // a trainable parameter of a normalized model (ρ or V)
	RoleVelocity = "velocity" // a momentum buffer, in a checkpoint
	RoleOrder    = "order"    // the batch order, in a checkpoint
	RoleKept     = "kept"     // the best epoch's parameter or running statistic, in a checkpoint
	RoleRunning  = "running"  // a batch-norm node's running mean or variance: state, not a parameter
)

// Normalization scales and holds.
const (
	ScalePerLayer  = "per-layer"
	ScaleGlobal    = "global"
	HoldMultiplier = "multiplier"
	HoldProjection = "projection"
)

// Header is the file's JSON header. Field names are part of the format.
type Header struct {
	Format        string          `json:"format"` // Format
	Library       string          `json:"library"`
	Created       string          `json:"created,omitempty"` // RFC 3339
	DType         string          `json:"dtype"`             // Float32 or Float64
	Inputs        int             `json:"inputs"`
	Graph         []Node          `json:"graph"`
	Normalization *Normalization  `json:"normalization,omitempty"`
	Tensors       []Tensor        `json:"arrays"`
	Pipeline      json.RawMessage `json:"pipeline,omitempty"` // data/prep's Pipeline
	Classes       []string        `json:"classes,omitempty"`
	Label         string          `json:"label,omitempty"`
	Loss          string          `json:"loss,omitempty"`
	Training      json.RawMessage `json:"training,omitempty"`
	Metrics       map[string]any  `json:"metrics,omitempty"`
	Checkpoint    *Checkpoint     `json:"checkpoint,omitempty"`
	// Decision, when present, is how a served model turns its scores
	// into an answer: a decision threshold, calibrated probabilities,
	// prediction sets and a reject option, fitted on validation rows.
	Decision *Decision `json:"decision,omitempty"`
}

// Decision holds the maps fitted on validation rows after training that
// turn a model's scores into an answer. Every part is optional; a reader
// that finds none answers with the arg-max class (for one signed score,
// the second class when the score is positive), as before.
type Decision struct {
	// Threshold, for a two-class model with one signed score, is the
	// score above which the answer is the second class (0 when absent).
	// ThresholdFor says how it was chosen: the metric it maximized on
	// the validation rows ("accuracy", "balanced", "macro-f1") or
	// "given" by the user.
	Threshold    *float64 `json:"threshold,omitempty"`
	ThresholdFor string   `json:"threshold_for,omitempty"`
	// Calibration maps scores to class probabilities: Platt scaling for
	// one signed score, P(second class) = 1/(1 + exp(−(A·s + B)));
	// temperature scaling for several, softmax(s/T).
	Calibration *Calibration `json:"calibration,omitempty"`
	// Sets, when present, makes split-conformal prediction sets from the
	// calibrated probabilities: every class y with 1 − p_y ≤ Quantile.
	Sets *Sets `json:"sets,omitempty"`
	// Abstain, when present, is the reject option: no answer for a row
	// whose normalized margin is below MarginFloor.
	Abstain *Abstain `json:"abstain,omitempty"`
	// Rows is the number of validation rows the maps were fitted on.
	Rows int `json:"rows,omitempty"`
}

// Calibration kinds.
const (
	CalibrationPlatt       = "platt"
	CalibrationTemperature = "temperature"
)

// Calibration is a fitted map from scores to probabilities.
type Calibration struct {
	Kind        string  `json:"kind"` // CalibrationPlatt or CalibrationTemperature
	A           float64 `json:"a,omitempty"`
	B           float64 `json:"b,omitempty"`
	Temperature float64 `json:"temperature,omitempty"`
}

// Sets are split-conformal prediction sets with a coverage level.
type Sets struct {
	// Coverage is the level 1 − α asked for: for rows exchangeable with
	// the calibration rows, the true class is in the set with
	// probability at least Coverage.
	Coverage float64 `json:"coverage"`
	// Quantile is q̂, the conformal quantile of 1 − p_true on the
	// calibration rows, at most 1 (1 puts every class in every set).
	Quantile float64 `json:"quantile"`
}

// Abstain is the reject option on the normalized margin: the gap between
// the largest and the second-largest score (for one signed score, its
// distance from the threshold), divided by ρ = ∏‖W_k‖_F over the dense
// layers.
type Abstain struct {
	MarginFloor float64 `json:"margin_floor"`
	// TargetError is the error rate among answered rows the floor was
	// chosen for on the validation rows; Answered the fraction of those
	// rows it answered.
	TargetError float64 `json:"target_error"`
	Answered    float64 `json:"answered"`
}

// Node is one node of the graph: enough to build it again.
type Node struct {
	Name string `json:"name"`
	Kind string `json:"kind"` // one of the Kind constants
	// Units is the width of a dense or readout layer.
	Units int `json:"units,omitempty"`
	// Sharpness is a smooth-relu's β.
	Sharpness float64 `json:"sharpness,omitempty"`
	// Degree, Lo, Hi and Fit describe a poly-relu.
	Degree int     `json:"degree,omitempty"`
	Lo     float64 `json:"lo,omitempty"`
	Hi     float64 `json:"hi,omitempty"`
	Fit    string  `json:"fit,omitempty"`
	// Coefficients are a poly-relu's fitted Chebyshev coefficients, in the
	// basis of t = (2x − Lo − Hi)/(Hi − Lo), written for readers outside
	// rhomb. rhomb's readers refit (internal/arith, one fit for training
	// and serving) and refuse a file whose coefficients differ from the
	// fit.
	Coefficients []float64 `json:"coefficients,omitempty"`
	// Scale, Shift and Epsilon describe a batch-norm node: whether it
	// has a learned per-unit scale γ (array "<name>.scale") and shift β
	// ("<name>.shift"), and the ε added to the variance. Its running
	// mean and variance are the arrays "<name>.mean" and "<name>.var".
	Scale   bool    `json:"scale,omitempty"`
	Shift   bool    `json:"shift,omitempty"`
	Epsilon float64 `json:"epsilon,omitempty"`
}

// Normalization records how a normalized model splits its layers into a
// scale ρ and directions V.
type Normalization struct {
	Scale        string   `json:"scale"` // ScalePerLayer or ScaleGlobal
	Hold         string   `json:"hold"`  // HoldMultiplier or HoldProjection
	PerUnit      bool     `json:"per_unit,omitempty"`
	SkipReadout  bool     `json:"skip_readout,omitempty"`
	NoRetraction bool     `json:"no_retraction,omitempty"`
	Layers       []string `json:"layers,omitempty"`
}

// Checkpoint is the trainer state a checkpoint file adds.
type Checkpoint struct {
	Step      int      `json:"step"`
	Epoch     int      `json:"epoch"`
	InEpoch   int      `json:"in_epoch"`
	EpochLoss float64  `json:"epoch_loss"`
	EpochRows int      `json:"epoch_rows"`
	LastLoss  *float64 `json:"last_loss"` // null before the first epoch ends
	BatchRNG  []byte   `json:"batch_rng"`
	NoiseRNG  []byte   `json:"noise_rng"`
	// Session is the training procedure's own record (optim/recipe),
	// kept as it is.
	Session json.RawMessage `json:"session,omitempty"`
}

// Tensor is one entry of the header's "arrays" table: a named, typed
// array of numbers in the data region ("tensors" in format version 1).
type Tensor = container.Tensor

// Sentinel causes carried by *Error; errors.Is finds them.
var (
	ErrMagic     = container.ErrMagic
	ErrVersion   = container.ErrVersion
	ErrTruncated = container.ErrTruncated
	ErrChecksum  = container.ErrChecksum
	ErrHeader    = container.ErrHeader
	ErrShape     = fmt.Errorf("tensors do not fit the network")
	ErrWeight    = fmt.Errorf("a weight is NaN or infinite")
)

// Error reports a model file that cannot be used, and where. It is the
// one error type of every model file reader in rhomb.
type Error struct {
	File   string // the file's name, or "" when read from memory
	Offset int64  // byte offset of the problem, or -1
	Err    error  // one of the sentinels above
	What   string // details
}

func (e *Error) Error() string {
	where := e.File
	if where == "" {
		where = "model file"
	}
	if e.Offset >= 0 {
		where += fmt.Sprintf(" at byte %d", e.Offset)
	}
	msg := where + ": " + e.Err.Error()
	if e.What != "" {
		msg += ": " + e.What
	}
	return msg
}

func (e *Error) Unwrap() error { return e.Err }

// ElemSize is the size in bytes of one element of dtype d, or 0 for a
// dtype the format does not know.
func ElemSize(d string) int64 { return container.ElemSize(d) }

// Assemble lays out a model file from its header JSON and tensor data (each
// tensor at its table offset, padded to a multiple of 8).
func Assemble(header, data []byte) []byte { return container.Assemble(header, data) }
