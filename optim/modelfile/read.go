package modelfile

import (
	"encoding/binary"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"os"
	"time"

	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/net/schema"
	"github.com/rhomb/rhomb/normalize"
	"github.com/rhomb/rhomb/optim"
)

// Load reads and validates the model file at path.
func Load[T net.Float](path string) (*Model[T], error) {
	if fi, err := os.Stat(path); err == nil && fi.IsDir() {
		return nil, fmt.Errorf("%s is a directory, not a model file", path)
	}
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	return Read[T](b, path)
}

// Read decodes a model file held in b; source names it in errors. It
// accepts exactly the files the serving reader (net/classify) accepts:
// both check a file with schema.Parse, which checks every size and offset
// in the file against len(b) before anything is allocated from it, so a
// file that lies about its contents costs no more memory than its own
// length. Tensors stored as float64 are rounded when T is float32, and
// widened in the other direction.
func Read[T net.Float](b []byte, source string) (*Model[T], error) {
	f, err := schema.Parse(b, source)
	if err != nil {
		return nil, err
	}
	// Anything that fails below is a disagreement between schema.Parse
	// and the training library (a bug), reported at the header.
	fail := func(err error, format string, args ...any) (*Model[T], error) {
		return nil, &FormatError{File: source, Offset: schema.PrefixLen, Err: err, What: fmt.Sprintf(format, args...)}
	}
	h := &f.Header
	n, err := net.FromSpec[T](h.Inputs, h.Graph)
	if err != nil {
		return fail(schema.ErrShape, "%v", err)
	}
	floats := func(name string, dst []T) error {
		t := f.ByName[name]
		if t == nil {
			return fmt.Errorf("tensor %q is missing", name)
		}
		if int(elements(t)) != len(dst) {
			return fmt.Errorf("tensor %q holds %d values, the model needs %d", name, elements(t), len(dst))
		}
		for i := range dst {
			dst[i] = T(value(f, t, i))
		}
		return nil
	}
	for _, p := range n.Params() {
		if err := floats(p.Name, p.Value); err != nil {
			return fail(schema.ErrShape, "%v", err)
		}
	}
	for _, r := range n.Running() {
		if err := floats(r.Name, r.Value); err != nil {
			return fail(schema.ErrShape, "%v", err)
		}
	}
	m := &Model[T]{Network: n, Pipeline: f.Pipeline, Classes: h.Classes, Label: h.Label, Loss: h.Loss, Training: h.Training, Metrics: h.Metrics, Library: h.Library, Decision: h.Decision}
	if h.Created != "" {
		m.Created, _ = time.Parse(time.RFC3339, h.Created)
	}
	if h.Normalization != nil {
		w, err := normalize.Wrap(n, normOptions(h.Normalization))
		if err != nil {
			return fail(schema.ErrShape, "normalization: %v", err)
		}
		for _, p := range w.Params() {
			if isWeight(n, p) {
				continue
			}
			if err := floats(p.Name, p.Value); err != nil {
				return fail(schema.ErrShape, "%v", err)
			}
		}
		// schema.Parse checked that the stored W is ρ·V bit for bit, so
		// this changes nothing; it brings the wrapper's own state up to
		// date.
		w.Sync()
		m.Normalized = w
	}
	params := m.Trainable().Params()
	if len(params) != len(f.Trainable) {
		return fail(schema.ErrShape, "%d trainable parameters, the file lists %d", len(params), len(f.Trainable))
	}
	for i, p := range params {
		if p.Name != f.Trainable[i].Name {
			return fail(schema.ErrShape, "trainable parameter %d is %q, the file lists %q", i, p.Name, f.Trainable[i].Name)
		}
	}
	if c := h.Checkpoint; c != nil {
		st := optim.State{Step: c.Step, Epoch: c.Epoch, InEpoch: c.InEpoch, EpochLoss: c.EpochLoss, EpochRows: c.EpochRows, BatchRNG: c.BatchRNG, NoiseRNG: c.NoiseRNG, LastLoss: math.NaN()}
		if c.LastLoss != nil {
			st.LastLoss = *c.LastLoss
		}
		wide := func(t *schema.Tensor) []float64 {
			v := make([]float64, elements(t))
			for i := range v {
				v[i] = value(f, t, i)
			}
			return v
		}
		// schema.Parse checked that the momentum buffers and kept values
		// are there for every trainable parameter or for none.
		for _, p := range params {
			if t := f.ByName["velocity/"+p.Name]; t != nil {
				st.Velocity = append(st.Velocity, wide(t))
			}
			if t := f.ByName["kept/"+p.Name]; t != nil {
				m.Kept = append(m.Kept, wide(t))
			}
		}
		if m.Kept != nil {
			// schema.Parse checked that a checkpoint that keeps the
			// parameters keeps the running statistics too.
			for _, r := range n.Running() {
				m.Kept = append(m.Kept, wide(f.ByName["kept/"+r.Name]))
			}
		}
		m.Session = c.Session
		t := f.ByName["order"]
		st.Order = make([]int, elements(t))
		for i := range st.Order {
			st.Order[i] = int(int32(binary.LittleEndian.Uint32(f.Data[t.Offset+4*int64(i):])))
		}
		m.Checkpoint = &st
	}
	return m, nil
}

func elements(t *schema.Tensor) int64 {
	n := int64(1)
	for _, d := range t.Shape {
		n *= int64(d)
	}
	return n
}

// value returns element i of a float tensor, widened to float64.
func value(f *schema.File, t *schema.Tensor, i int) float64 {
	if t.DType == schema.Float32 {
		return float64(math.Float32frombits(binary.LittleEndian.Uint32(f.Data[t.Offset+4*int64(i):])))
	}
	return math.Float64frombits(binary.LittleEndian.Uint64(f.Data[t.Offset+8*int64(i):]))
}

func normOptions(h *schema.Normalization) normalize.Options {
	o := normalize.Options{PerUnit: h.PerUnit, SkipReadout: h.SkipReadout, NoRetraction: h.NoRetraction, Layers: h.Layers}
	if h.Scale == schema.ScaleGlobal {
		o.Scale = normalize.Global
	}
	if h.Hold == schema.HoldProjection {
		o.Hold = normalize.Projection
	}
	return o
}

// ElementType reads only the header of the model file at path and returns
// the element type its weights are stored in, "float32" or "float64", so
// that a caller can load it without converting.
func ElementType(path string) (string, error) {
	fh, err := os.Open(path)
	if err != nil {
		return "", err
	}
	defer fh.Close()
	if fi, err := fh.Stat(); err == nil && fi.IsDir() {
		return "", fmt.Errorf("%s is a directory, not a model file", path)
	}
	var prefix [schema.PrefixLen]byte
	if _, err := io.ReadFull(fh, prefix[:]); err != nil {
		return "", &FormatError{File: path, Offset: 0, Err: ErrTruncated}
	}
	if string(prefix[:8]) != schema.Magic {
		return "", &FormatError{File: path, Offset: 0, Err: ErrMagic}
	}
	hl := int64(binary.LittleEndian.Uint32(prefix[12:]))
	if hl > schema.MaxHeader {
		return "", &FormatError{File: path, Offset: 12, Err: ErrHeader, What: "header too long"}
	}
	if fi, err := fh.Stat(); err == nil && fi.Size() < schema.PrefixLen+hl+schema.SumLen {
		return "", &FormatError{File: path, Offset: 12, Err: ErrTruncated, What: fmt.Sprintf("header of %d bytes does not fit in %d bytes", hl, fi.Size())}
	}
	var h struct {
		DType string `json:"dtype"`
	}
	if err := json.NewDecoder(io.LimitReader(fh, hl)).Decode(&h); err != nil {
		return "", &FormatError{File: path, Offset: schema.PrefixLen, Err: ErrHeader, What: err.Error()}
	}
	if h.DType != schema.Float32 && h.DType != schema.Float64 {
		return "", &FormatError{File: path, Offset: schema.PrefixLen, Err: ErrHeader, What: fmt.Sprintf("dtype %q", h.DType)}
	}
	return h.DType, nil
}
