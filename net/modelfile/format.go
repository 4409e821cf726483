package modelfile

import (
	"encoding/json"
	"errors"
	"fmt"
)

// The file layout. All integers are little-endian.
//
//	offset  size  content
//	0       8     magic "RHOMBMF\n"
//	8       4     format version (uint32), currently 1
//	12      4     header length H (uint32)
//	16      H     header: UTF-8 JSON, see header
//	16+H    p     zero padding to a multiple of 8
//	D       …     tensor data: each tensor at D + its offset, little-endian
//	end−32  32    SHA-256 of every byte before it
const (
	magic         = "RHOMBMF\n"
	formatVersion = 1
	prefixLen     = 16
	sumLen        = 32
	// maxHeader caps the header length a file may declare (64 MiB); the
	// header of a model with a 60,000-row checkpoint is far smaller,
	// because large arrays live in tensors.
	maxHeader = 64 << 20
	// maxTensors caps the number of tensors a file may declare, maxNodes
	// the number of nodes in its graph.
	maxTensors = 1 << 14
	maxNodes   = 1 << 10
	// maxFitCost caps Σ(d+1)² over the graph's poly-relu nodes: eight of the
	// largest degree, PolyMaxDegree = 64 (about 14 MiB of fitting work).
	maxFitCost = 8 * 65 * 65
)

// Sentinel causes carried by FormatError.
var (
	ErrMagic     = errors.New("not a rhomb model file (bad magic bytes)")
	ErrVersion   = errors.New("unsupported format version")
	ErrTruncated = errors.New("file is truncated")
	ErrChecksum  = errors.New("checksum mismatch: the file is corrupted")
	ErrHeader    = errors.New("bad header")
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
	Format        string            `json:"format"` // "rhomb-model"
	Library       string            `json:"library"`
	Created       string            `json:"created,omitempty"` // RFC 3339
	DType         string            `json:"dtype"`             // "float32" or "float64"
	Inputs        int               `json:"inputs"`
	Graph         []json.RawMessage `json:"graph"`
	Normalization *normHeader       `json:"normalization,omitempty"`
	Tensors       []tensorHeader    `json:"tensors"`
	Pipeline      json.RawMessage   `json:"pipeline,omitempty"`
	Classes       []string          `json:"classes,omitempty"`
	Label         string            `json:"label,omitempty"`
	Loss          string            `json:"loss,omitempty"`
	Training      json.RawMessage   `json:"training,omitempty"`
	Metrics       map[string]any    `json:"metrics,omitempty"`
	Checkpoint    *checkpointHeader `json:"checkpoint,omitempty"`
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
)

type tensorHeader struct {
	Name   string `json:"name"`
	Role   string `json:"role"`
	DType  string `json:"dtype"` // "float32", "float64" or "int32"
	Shape  []int  `json:"shape"`
	Offset int64  `json:"offset"` // from the start of the tensor data
}

type checkpointHeader struct {
	Step      int      `json:"step"`
	Epoch     int      `json:"epoch"`
	InEpoch   int      `json:"in_epoch"`
	EpochLoss float64  `json:"epoch_loss"`
	EpochRows int      `json:"epoch_rows"`
	LastLoss  *float64 `json:"last_loss"` // null before the first epoch ends
	BatchRNG  []byte   `json:"batch_rng"`
	NoiseRNG  []byte   `json:"noise_rng"`
}

func dtypeSize(d string) int {
	switch d {
	case "float32", "int32":
		return 4
	case "float64":
		return 8
	}
	return 0
}
