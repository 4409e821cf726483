package modelfile

import (
	"bytes"
	"encoding/binary"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"time"

	"github.com/rhomb/rhomb/data/prep"
	"github.com/rhomb/rhomb/internal/atomicfile"
	"github.com/rhomb/rhomb/internal/version"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/net/schema"
	"github.com/rhomb/rhomb/normalize"
	"github.com/rhomb/rhomb/optim"
)

// Model is what a model file holds.
type Model[T net.Float] struct {
	// Network computes the predictions; its W are current.
	Network *net.Network[T]
	// Normalized is the scale/direction wrapper the network was trained
	// with, restored with its exact ρ and V; nil for a plain network.
	Normalized *normalize.Net[T]
	// Pipeline turns raw input columns into the network's features; nil
	// when the inputs are features already.
	Pipeline *prep.Pipeline
	// Classes names the outputs' classes (for one ±1 output, the −1 class
	// first).
	Classes []string
	// Label names the label column of the training data, when it had one.
	Label string
	// Loss is the name of the loss trained with.
	Loss string
	// Training is the caller's record of how the model was trained, any
	// JSON value; Metrics its final figures. Both are kept as they are.
	Training json.RawMessage
	Metrics  map[string]any
	// Library and Created are filled in by Write (the rhomb version and
	// the time, UTC), and read back by Read.
	Library string
	Created time.Time
	// Checkpoint, when set, is the trainer state to resume from.
	Checkpoint *optim.State
	// Session and Kept belong to a checkpoint of a training procedure that
	// keeps the best epoch (package optim/recipe): its own record, kept as
	// it is, and the best epoch's trainable parameters in Params order,
	// followed by its running statistics in Network.Running order (batch
	// normalization; none without), widened to float64. Both are written
	// only with a Checkpoint.
	Session json.RawMessage
	Kept    [][]float64
	// Decision is how a served model turns scores into answers
	// (threshold, calibration, prediction sets, reject option), fitted on
	// validation rows after training (package optim/recipe); nil for the
	// plain arg-max rule.
	Decision *schema.Decision
}

// Trainable returns the model the trainer updates: the wrapper if there
// is one, else the network.
func (m *Model[T]) Trainable() optim.Model[T] {
	if m.Normalized != nil {
		return m.Normalized
	}
	return m.Network
}

func dtypeOf[T net.Float]() string {
	var z T
	if _, ok := any(z).(float32); ok {
		return schema.Float32
	}
	return schema.Float64
}

// Write encodes m. A normalized model's W are brought up to date (ρ·V)
// first.
func Write[T net.Float](w io.Writer, m *Model[T]) error {
	b, err := encode(m)
	if err != nil {
		return err
	}
	_, err = w.Write(b)
	return err
}

func encode[T net.Float](m *Model[T]) ([]byte, error) {
	if m.Network == nil {
		return nil, fmt.Errorf("modelfile: Write: the model has no network")
	}
	if m.Normalized != nil {
		if m.Normalized.Base() != m.Network {
			return nil, fmt.Errorf("modelfile: Write: Normalized wraps a different network than Network")
		}
		if len(m.Network.Running()) > 0 {
			return nil, fmt.Errorf("modelfile: Write: a weight-normalized model cannot have batch-norm nodes (they make a layer's scale irrelevant); train it without weight normalization")
		}
		m.Normalized.Sync()
	}
	specs, err := m.Network.Spec()
	if err != nil {
		return nil, fmt.Errorf("modelfile: Write: %w", err)
	}
	h := schema.Header{
		Format: schema.Format, Library: "rhomb " + version.Version,
		Created: time.Now().UTC().Format(time.RFC3339), DType: dtypeOf[T](),
		Inputs: m.Network.In(), Classes: m.Classes, Label: m.Label, Loss: m.Loss,
		Training: m.Training, Metrics: m.Metrics, Decision: m.Decision,
	}
	h.Graph = specs
	if m.Pipeline != nil {
		if h.Pipeline, err = json.Marshal(m.Pipeline); err != nil {
			return nil, fmt.Errorf("modelfile: Write: pipeline: %w", err)
		}
	}
	var data bytes.Buffer
	add := func(name, role, dtype string, shape []int, write func(*bytes.Buffer)) {
		h.Tensors = append(h.Tensors, schema.Tensor{Name: name, Role: role, DType: dtype, Shape: shape, Offset: int64(data.Len())})
		write(&data)
		for data.Len()%8 != 0 {
			data.WriteByte(0)
		}
	}
	for _, p := range m.Network.Params() {
		add(p.Name, schema.RoleWeight, h.DType, []int{p.Rows, p.Cols}, func(b *bytes.Buffer) { putFloats(b, p.Value) })
	}
	running := m.Network.Running()
	for _, r := range running {
		add(r.Name, schema.RoleRunning, h.DType, []int{len(r.Value)}, func(b *bytes.Buffer) { putFloats(b, r.Value) })
	}
	if n := m.Normalized; n != nil {
		o := n.Options()
		h.Normalization = &schema.Normalization{Scale: schema.ScalePerLayer, Hold: schema.HoldMultiplier, PerUnit: o.PerUnit, SkipReadout: o.SkipReadout, NoRetraction: o.NoRetraction, Layers: o.Layers}
		if o.Scale == normalize.Global {
			h.Normalization.Scale = schema.ScaleGlobal
		}
		if o.Hold == normalize.Projection {
			h.Normalization.Hold = schema.HoldProjection
		}
		for _, p := range n.Params() {
			if isWeight(m.Network, p) {
				continue // a plain layer's W, written above
			}
			add(p.Name, schema.RoleParam, h.DType, []int{p.Rows, p.Cols}, func(b *bytes.Buffer) { putFloats(b, p.Value) })
		}
	}
	if c := m.Checkpoint; c != nil {
		params := m.Trainable().Params()
		if c.Velocity != nil && len(c.Velocity) != len(params) {
			return nil, fmt.Errorf("modelfile: Write: checkpoint has %d momentum buffers for %d parameters", len(c.Velocity), len(params))
		}
		h.Checkpoint = &schema.Checkpoint{Step: c.Step, Epoch: c.Epoch, InEpoch: c.InEpoch, EpochLoss: c.EpochLoss, EpochRows: c.EpochRows, BatchRNG: c.BatchRNG, NoiseRNG: c.NoiseRNG}
		if !math.IsNaN(c.LastLoss) {
			l := c.LastLoss
			h.Checkpoint.LastLoss = &l
		}
		for i, v := range c.Velocity {
			add("velocity/"+params[i].Name, schema.RoleVelocity, schema.Float64, []int{len(v)}, func(b *bytes.Buffer) { putFloats(b, v) })
		}
		if m.Kept != nil && len(m.Kept) != len(params)+len(running) {
			return nil, fmt.Errorf("modelfile: Write: checkpoint keeps %d arrays for %d parameters and %d running statistics", len(m.Kept), len(params), len(running))
		}
		for i, v := range m.Kept {
			name, want := "", 0
			if i < len(params) {
				name, want = params[i].Name, len(params[i].Value)
			} else {
				name, want = running[i-len(params)].Name, len(running[i-len(params)].Value)
			}
			if len(v) != want {
				return nil, fmt.Errorf("modelfile: Write: kept array %s has %d values for %d", name, len(v), want)
			}
			add("kept/"+name, schema.RoleKept, schema.Float64, []int{len(v)}, func(b *bytes.Buffer) { putFloats(b, v) })
		}
		h.Checkpoint.Session = m.Session
		if len(c.Order) > math.MaxInt32 {
			return nil, fmt.Errorf("modelfile: Write: %d rows do not fit the checkpoint's int32 order", len(c.Order))
		}
		add("order", schema.RoleOrder, schema.Int32, []int{len(c.Order)}, func(b *bytes.Buffer) {
			for _, r := range c.Order {
				binary.Write(b, binary.LittleEndian, int32(r))
			}
		})
	}
	hj, err := json.Marshal(h)
	if err != nil {
		return nil, fmt.Errorf("modelfile: Write: header: %w", err)
	}
	return schema.Assemble(hj, data.Bytes()), nil
}

func isWeight[T net.Float](n *net.Network[T], p *net.Param[T]) bool {
	for _, q := range n.Params() {
		if q == p {
			return true
		}
	}
	return false
}

func putFloats[T net.Float | float64](b *bytes.Buffer, v []T) {
	var tmp [8]byte
	for _, x := range v {
		switch f := any(x).(type) {
		case float32:
			binary.LittleEndian.PutUint32(tmp[:4], math.Float32bits(f))
			b.Write(tmp[:4])
		case float64:
			binary.LittleEndian.PutUint64(tmp[:], math.Float64bits(f))
			b.Write(tmp[:])
		}
	}
}

// Save writes m to path atomically: to a temporary file in the same
// directory, synced to disk, then renamed over path. A crash or an
// interrupt during Save leaves either the old file or the new one, never a
// part of one.
func Save[T net.Float](path string, m *Model[T]) error {
	b, err := encode(m)
	if err != nil {
		return err
	}
	return writeAtomic(path, b)
}

func writeAtomic(path string, b []byte) error {
	if err := atomicfile.WriteFile(path, b); err != nil {
		return fmt.Errorf("modelfile: Save: %w", err)
	}
	return nil
}
