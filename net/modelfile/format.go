package modelfile

import (
	"encoding/json"
	"errors"
	"fmt"

	"github.com/rhomb/rhomb/internal/container"
)

// The layout constants and the container-level limits live in
// internal/container, shared with net/classify's reader; maxNodes and
// maxFitCost bound the graph, which this package decodes itself.
const (
	maxNodes   = container.MaxNodes
	maxFitCost = container.MaxFitCost
)

// Sentinel causes carried by FormatError. The container-level ones are
// the same values as net/classify's, so errors.Is finds either name.
var (
	ErrMagic     = container.ErrMagic
	ErrVersion   = container.ErrVersion
	ErrTruncated = container.ErrTruncated
	ErrChecksum  = container.ErrChecksum
	ErrHeader    = container.ErrHeader
	ErrShape     = errors.New("tensors do not fit the network")
)

// FormatError reports a model file that cannot be read, and where.
type FormatError struct {
	File   string
	Offset int64 // byte offset of the problem, or -1
	What   string
	Err    error
}

func (e *FormatError) Error() string {
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

func (e *FormatError) Unwrap() error { return e.Err }

// header is the JSON header. Field names are part of the format; see
// docs/model-file.md.
type header struct {
	Format        string             `json:"format"` // "rhomb-model"
	Library       string             `json:"library"`
	Created       string             `json:"created,omitempty"` // RFC 3339
	DType         string             `json:"dtype"`             // "float32" or "float64"
	Inputs        int                `json:"inputs"`
	Graph         []json.RawMessage  `json:"graph"`
	Normalization *normHeader        `json:"normalization,omitempty"`
	Tensors       []container.Tensor `json:"tensors"`
	Pipeline      json.RawMessage    `json:"pipeline,omitempty"`
	Classes       []string           `json:"classes,omitempty"`
	Label         string             `json:"label,omitempty"`
	Loss          string             `json:"loss,omitempty"`
	Training      json.RawMessage    `json:"training,omitempty"`
	Metrics       map[string]any     `json:"metrics,omitempty"`
	Checkpoint    *checkpointHeader  `json:"checkpoint,omitempty"`
}

type normHeader struct {
	Scale        string   `json:"scale"` // "per-layer" or "global"
	Hold         string   `json:"hold"`  // "multiplier" or "projection"
	PerUnit      bool     `json:"per_unit,omitempty"`
	SkipReadout  bool     `json:"skip_readout,omitempty"`
	NoRetraction bool     `json:"no_retraction,omitempty"`
	Layers       []string `json:"layers,omitempty"`
}

// Tensor roles.
const (
	roleWeight   = "weight"   // W of a dense layer: all a reader needs to predict
	roleParam    = "param"    // a trainable parameter of a normalized model (ρ or V)
	roleVelocity = "velocity" // a momentum buffer, in a checkpoint
	roleOrder    = "order"    // the batch order, in a checkpoint
	roleKept     = "kept"     // the best epoch's parameter, in a checkpoint
)

type checkpointHeader struct {
	Step      int      `json:"step"`
	Epoch     int      `json:"epoch"`
	InEpoch   int      `json:"in_epoch"`
	EpochLoss float64  `json:"epoch_loss"`
	EpochRows int      `json:"epoch_rows"`
	LastLoss  *float64 `json:"last_loss"` // null before the first epoch ends
	BatchRNG  []byte   `json:"batch_rng"`
	NoiseRNG  []byte   `json:"noise_rng"`
	// Session is the training procedure's own record (optim/recipe's
	// SessionState), kept as it is.
	Session json.RawMessage `json:"session,omitempty"`
}
