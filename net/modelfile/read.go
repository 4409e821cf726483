package modelfile

import (
	"bytes"
	"encoding/binary"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"os"
	"time"

	"github.com/rhomb/rhomb/data/prep"
	"github.com/rhomb/rhomb/internal/container"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/normalize"
	"github.com/rhomb/rhomb/optim"
)

// Load reads and validates the model file at path.
func Load[T net.Float](path string) (*Model[T], error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("modelfile: %w", err)
	}
	return Read[T](b, path)
}

// Read decodes a model file held in b; source names it in errors. Every
// size and offset in the file is checked against len(b) before anything
// is allocated from it, so a file that lies about its contents costs no
// more memory than its own length. Tensors stored as float64 are rounded
// when T is float32, and widened in the other direction.
func Read[T net.Float](b []byte, source string) (*Model[T], error) {
	fail := func(off int64, err error, format string, args ...any) (*Model[T], error) {
		return nil, &FormatError{File: source, Offset: off, Err: err, What: fmt.Sprintf(format, args...)}
	}
	// The container: prefix, header, tensor table and checksum, checked in
	// internal/container; the header is decoded here first, into this
	// package's own type, before anything after it is checked.
	var h header
	f, err := container.Parse(b, func(raw []byte) ([]container.Tensor, error) {
		err := container.DecodeHeader(raw, &h, &h.Format)
		return h.Tensors, err
	})
	if err != nil {
		ce := err.(*container.Error)
		return nil, &FormatError{File: source, Offset: ce.Offset, Err: ce.Err, What: ce.What}
	}
	byName := f.ByName

	// The graph: walk the widths and check every dense layer's weights are
	// in the file with the right shape before building anything.
	specs := make([]net.NodeSpec, len(h.Graph))
	for i, raw := range h.Graph {
		d := json.NewDecoder(bytes.NewReader(raw))
		d.DisallowUnknownFields()
		if err := d.Decode(&specs[i]); err != nil {
			return fail(container.PrefixLen, ErrHeader, "graph node %d: %v", i, err)
		}
	}
	// Bound what building the graph costs before building it: a poly-relu
	// fits a least-squares problem of about 400·(d+1)² bytes.
	if len(specs) > maxNodes {
		return fail(container.PrefixLen, ErrHeader, "%d nodes exceed the limit of %d", len(specs), maxNodes)
	}
	fitCost := 0
	for _, s := range specs {
		if s.Kind == "poly-relu" && s.Degree > 0 && s.Degree <= net.PolyMaxDegree {
			fitCost += (s.Degree + 1) * (s.Degree + 1)
		}
	}
	if fitCost > maxFitCost {
		return fail(container.PrefixLen, ErrHeader, "polynomial activations of total size %d exceed the limit of %d", fitCost, maxFitCost)
	}
	if h.Inputs < 1 {
		return fail(container.PrefixLen, ErrHeader, "inputs %d", h.Inputs)
	}
	width := h.Inputs
	for i, s := range specs {
		switch s.Kind {
		case "constant-one":
			width++
		case "dense", "readout":
			t := byName[s.Name+".W"]
			if t == nil || t.Role != roleWeight || len(t.Shape) != 2 || t.Shape[0] != s.Units || t.Shape[1] != width {
				return fail(container.PrefixLen, ErrShape, "node %d %q: want a weight tensor %q of shape [%d %d]", i, s.Name, s.Name+".W", s.Units, width)
			}
			width = s.Units
		}
	}
	n, err := net.FromSpec[T](h.Inputs, specs)
	if err != nil {
		return fail(container.PrefixLen, ErrShape, "%v", err)
	}
	if h.DType != "float32" && h.DType != "float64" {
		return fail(container.PrefixLen, ErrHeader, "dtype %q", h.DType)
	}
	data := f.Data
	load := func(t *container.Tensor, dst []T) error {
		want := 1
		for _, d := range t.Shape {
			want *= d
		}
		if want != len(dst) {
			return fmt.Errorf("tensor %q holds %d values, the model needs %d", t.Name, want, len(dst))
		}
		src := data[t.Offset:]
		for i := range dst {
			var v float64
			switch t.DType {
			case "float32":
				v = float64(math.Float32frombits(binary.LittleEndian.Uint32(src[4*i:])))
			case "float64":
				v = math.Float64frombits(binary.LittleEndian.Uint64(src[8*i:]))
			default:
				return fmt.Errorf("tensor %q: dtype %s where floats belong", t.Name, t.DType)
			}
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return fmt.Errorf("tensor %q: value %d is %v", t.Name, i, v)
			}
			dst[i] = T(v)
		}
		return nil
	}
	for _, p := range n.Params() {
		if err := load(byName[p.Name], p.Value); err != nil {
			return fail(container.PrefixLen, ErrShape, "%v", err)
		}
	}
	m := &Model[T]{Network: n, Classes: h.Classes, Label: h.Label, Loss: h.Loss, Training: h.Training, Metrics: h.Metrics, Library: h.Library}
	if h.Created != "" {
		m.Created, _ = time.Parse(time.RFC3339, h.Created)
	}
	if h.Normalization != nil {
		o, err := h.Normalization.options()
		if err != nil {
			return fail(container.PrefixLen, ErrHeader, "normalization: %v", err)
		}
		w, err := normalize.Wrap(n, o)
		if err != nil {
			return fail(container.PrefixLen, ErrShape, "normalization: %v", err)
		}
		for _, p := range w.Params() {
			if isWeight(n, p) {
				continue
			}
			t := byName[p.Name]
			if t == nil || t.Role != roleParam {
				return fail(container.PrefixLen, ErrShape, "normalized parameter %q is missing", p.Name)
			}
			if err := load(t, p.Value); err != nil {
				return fail(container.PrefixLen, ErrShape, "%v", err)
			}
		}
		w.Sync()
		m.Normalized = w
	}
	if len(h.Pipeline) > 0 {
		var p prep.Pipeline
		if err := json.Unmarshal(h.Pipeline, &p); err != nil {
			return fail(container.PrefixLen, ErrHeader, "pipeline: %v", err)
		}
		if err := p.Validate(); err != nil {
			return fail(container.PrefixLen, ErrHeader, "pipeline: %v", err)
		}
		if p.Width() != h.Inputs {
			return fail(container.PrefixLen, ErrShape, "pipeline makes %d features, the network takes %d", p.Width(), h.Inputs)
		}
		m.Pipeline = &p
	}
	if c := h.Checkpoint; c != nil {
		st := optim.State{Step: c.Step, Epoch: c.Epoch, InEpoch: c.InEpoch, EpochLoss: c.EpochLoss, EpochRows: c.EpochRows, BatchRNG: c.BatchRNG, NoiseRNG: c.NoiseRNG, LastLoss: math.NaN()}
		if c.LastLoss != nil {
			st.LastLoss = *c.LastLoss
		}
		for _, p := range m.Trainable().Params() {
			t := byName["velocity/"+p.Name]
			if t == nil {
				continue
			}
			if t.DType != "float64" || len(t.Shape) != 1 || t.Shape[0] != len(p.Value) {
				return fail(container.PrefixLen, ErrShape, "momentum buffer %q: shape %v %s, want [%d] float64", t.Name, t.Shape, t.DType, len(p.Value))
			}
			v := make([]float64, len(p.Value))
			for i := range v {
				v[i] = math.Float64frombits(binary.LittleEndian.Uint64(data[t.Offset+8*int64(i):]))
			}
			st.Velocity = append(st.Velocity, v)
		}
		if st.Velocity != nil && len(st.Velocity) != len(m.Trainable().Params()) {
			return fail(container.PrefixLen, ErrShape, "%d momentum buffers for %d parameters", len(st.Velocity), len(m.Trainable().Params()))
		}
		for _, p := range m.Trainable().Params() {
			t := byName["kept/"+p.Name]
			if t == nil {
				continue
			}
			if t.Role != roleKept || t.DType != "float64" || len(t.Shape) != 1 || t.Shape[0] != len(p.Value) {
				return fail(container.PrefixLen, ErrShape, "kept parameter %q: role %s, shape %v %s, want kept [%d] float64", t.Name, t.Role, t.Shape, t.DType, len(p.Value))
			}
			v := make([]float64, len(p.Value))
			for i := range v {
				v[i] = math.Float64frombits(binary.LittleEndian.Uint64(data[t.Offset+8*int64(i):]))
				if math.IsNaN(v[i]) || math.IsInf(v[i], 0) {
					return fail(container.PrefixLen, ErrShape, "kept parameter %q: value %d is %v", t.Name, i, v[i])
				}
			}
			m.Kept = append(m.Kept, v)
		}
		if m.Kept != nil && len(m.Kept) != len(m.Trainable().Params()) {
			return fail(container.PrefixLen, ErrShape, "%d kept parameters for %d", len(m.Kept), len(m.Trainable().Params()))
		}
		m.Session = c.Session
		t := byName["order"]
		if t == nil || t.Role != roleOrder || t.DType != "int32" || len(t.Shape) != 1 {
			return fail(container.PrefixLen, ErrShape, "checkpoint without its batch order")
		}
		st.Order = make([]int, t.Shape[0])
		for i := range st.Order {
			st.Order[i] = int(int32(binary.LittleEndian.Uint32(data[t.Offset+4*int64(i):])))
		}
		m.Checkpoint = &st
	}
	return m, nil
}

func (h *normHeader) options() (normalize.Options, error) {
	o := normalize.Options{PerUnit: h.PerUnit, SkipReadout: h.SkipReadout, NoRetraction: h.NoRetraction, Layers: h.Layers}
	switch h.Scale {
	case "per-layer":
	case "global":
		o.Scale = normalize.Global
	default:
		return o, fmt.Errorf("scale %q", h.Scale)
	}
	switch h.Hold {
	case "multiplier":
	case "projection":
		o.Hold = normalize.Projection
	default:
		return o, fmt.Errorf("hold %q", h.Hold)
	}
	return o, nil
}

// ElementType reads only the header of the model file at path and returns
// the element type its weights are stored in, "float32" or "float64", so
// that a caller can load it without converting.
func ElementType(path string) (string, error) {
	f, err := os.Open(path)
	if err != nil {
		return "", fmt.Errorf("modelfile: %w", err)
	}
	defer f.Close()
	var prefix [container.PrefixLen]byte
	if _, err := io.ReadFull(f, prefix[:]); err != nil {
		return "", &FormatError{File: path, Offset: 0, Err: ErrTruncated}
	}
	if string(prefix[:8]) != container.Magic {
		return "", &FormatError{File: path, Offset: 0, Err: ErrMagic}
	}
	hl := int64(binary.LittleEndian.Uint32(prefix[12:]))
	if hl > container.MaxHeader {
		return "", &FormatError{File: path, Offset: 12, Err: ErrHeader, What: "header too long"}
	}
	if fi, err := f.Stat(); err == nil && fi.Size() < container.PrefixLen+hl+container.SumLen {
		return "", &FormatError{File: path, Offset: 12, Err: ErrTruncated, What: fmt.Sprintf("header of %d bytes does not fit in %d bytes", hl, fi.Size())}
	}
	var h struct {
		DType string `json:"dtype"`
	}
	if err := json.NewDecoder(io.LimitReader(f, hl)).Decode(&h); err != nil {
		return "", &FormatError{File: path, Offset: container.PrefixLen, Err: ErrHeader, What: err.Error()}
	}
	if h.DType != "float32" && h.DType != "float64" {
		return "", &FormatError{File: path, Offset: container.PrefixLen, Err: ErrHeader, What: fmt.Sprintf("dtype %q", h.DType)}
	}
	return h.DType, nil
}
