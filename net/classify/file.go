package classify

import (
	"encoding/binary"
	"encoding/hex"
	"fmt"
	"math"
	"os"
	"time"

	"github.com/rhomb/rhomb/internal/arith"
	"github.com/rhomb/rhomb/net/schema"
)

// Sentinel causes carried by FileError; errors.Is finds them. They are
// the model file format's own (package net/schema), the same
// values the training library's reader reports.
var (
	ErrMagic     = schema.ErrMagic
	ErrVersion   = schema.ErrVersion
	ErrTruncated = schema.ErrTruncated
	ErrChecksum  = schema.ErrChecksum
	ErrHeader    = schema.ErrHeader
	ErrShape     = schema.ErrShape
	ErrWeight    = schema.ErrWeight
)

// FileError reports a model file that cannot be used, and where: the one
// error type of rhomb's model file readers (schema.Error).
type FileError = schema.Error

// Load reads and validates the model file at path; see Read.
func Load(path string) (*Model, error) {
	if fi, err := os.Stat(path); err == nil && fi.IsDir() {
		return nil, fmt.Errorf("%s is a directory, not a model file", path)
	}
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	return Read(b, path)
}

// Read decodes and validates a model file held in b; source names it in
// errors. It accepts exactly the files the training library's reader
// accepts: both check a file with schema.Parse (magic and version, every
// size and offset against len(b) before anything is allocated from it,
// the tensor table, the checksum, the graph's widths against the weight
// tensors, finite weights, the normalized parameters, a valid
// preprocessing pipeline of the network's input width) and report the
// first problem as a *FileError. b is not retained.
func Read(b []byte, source string) (*Model, error) {
	f, err := schema.Parse(b, source)
	if err != nil {
		return nil, err
	}
	h := &f.Header
	m := &Model{features: h.Inputs, dtype: h.DType, outputs: f.Outputs, maxWidth: h.Inputs}
	for i, s := range h.Graph {
		l := layer{in: f.Widths[i][0], out: f.Widths[i][1]}
		switch s.Kind {
		case schema.KindConstantOne:
			l.kind = kindOne
		case schema.KindDense, schema.KindReadout:
			l.kind = kindDense
			l.loadWeights(f.ByName[s.Name+".W"], f.Data)
		case schema.KindReLU:
			l.kind = kindReLU
		case schema.KindBatchNorm:
			l.kind = kindBatchNorm
			l.loadBatchNorm(f, s)
		case schema.KindSmoothReLU:
			l.kind = kindSmooth
			l.beta = s.Sharpness
		case schema.KindPolyReLU:
			fit := arith.LeastSquares
			if s.Fit == schema.FitInterpolation {
				fit = arith.Interpolation
			}
			p, err := arith.FitPoly(s.Degree, s.Lo, s.Hi, fit)
			if err != nil { // schema.Parse checked the settings
				return nil, &FileError{File: source, Offset: schema.PrefixLen, Err: ErrShape, What: fmt.Sprintf("node %d %q: %v", i, s.Name, err)}
			}
			l.kind = kindPoly
			l.poly = &p
		}
		m.layers = append(m.layers, l)
		m.maxWidth = max(m.maxWidth, l.out)
	}
	if f.Pipeline != nil {
		m.pipeline = f.Pipeline
		m.inputs = f.Pipeline.Inputs()
		m.featureNames = f.Pipeline.FeatureNames()
	} else {
		m.featureNames = make([]string, h.Inputs)
		for i := range m.featureNames {
			m.featureNames[i] = fmt.Sprintf("x%d", i)
		}
	}
	info := Info{
		Version: hex.EncodeToString(f.Sum[:8]), SHA256: hex.EncodeToString(f.Sum[:]),
		Source: source, Library: h.Library, DType: h.DType, Features: h.Inputs, Outputs: m.outputs,
		Classes: h.Classes, Label: h.Label, Loss: h.Loss, Metrics: h.Metrics, Inputs: m.inputs,
		Checkpoint: h.Checkpoint != nil,
	}
	if h.Created != "" {
		if t, err := time.Parse(time.RFC3339, h.Created); err == nil {
			info.Created = t
		}
	}
	if h.Normalization != nil {
		info.Normalization = h.Normalization.Scale
	}
	for i, s := range h.Graph {
		info.Graph = append(info.Graph, Node{Name: s.Name, Kind: s.Kind, In: m.layers[i].in, Out: m.layers[i].out})
	}
	m.info = info
	m.classes = h.Classes
	m.decision = h.Decision
	m.rho = 1
	for i := range m.layers {
		if l := &m.layers[i]; l.kind == kindDense {
			if l.w32 != nil {
				m.rho *= arith.Norm(l.w32)
			} else {
				m.rho *= arith.Norm(l.w64)
			}
		}
	}
	return m, nil
}

// loadBatchNorm turns a batch-norm node's stored running statistics,
// scale and shift (schema.Parse checked them) into the per-unit mean,
// factor γ/√(var + ε) and shift of its inference form, widened exactly
// from the file's element type and computed by internal/arith as the
// training node computes them.
func (l *layer) loadBatchNorm(f *schema.File, s schema.Node) {
	n := l.in
	read := func(name string) []float64 {
		v := make([]float64, n)
		t := f.ByName[name]
		if t == nil {
			return nil
		}
		for i := range v {
			if t.DType == schema.Float32 {
				v[i] = float64(math.Float32frombits(binary.LittleEndian.Uint32(f.Data[t.Offset+4*int64(i):])))
			} else {
				v[i] = math.Float64frombits(binary.LittleEndian.Uint64(f.Data[t.Offset+8*int64(i):]))
			}
		}
		return v
	}
	l.bnMean = read(s.Name + ".mean")
	variance := read(s.Name + ".var")
	gamma, shift := read(s.Name+".scale"), read(s.Name+".shift")
	l.bnFactor = make([]float64, n)
	for j := range l.bnFactor {
		g := 1.0
		if gamma != nil {
			g = gamma[j]
		}
		l.bnFactor[j] = arith.BatchNormFactor(g, variance[j], s.Epsilon)
	}
	l.bnShift = shift
	if shift == nil {
		l.bnShift = make([]float64, n)
	}
}

// loadWeights copies a weight tensor out of the file in the file's own
// element type (schema.Parse checked its shape and that it is finite).
func (l *layer) loadWeights(t *schema.Tensor, data []byte) {
	n := l.in * l.out
	src := data[t.Offset:]
	if t.DType == schema.Float32 {
		l.w32 = make([]float32, n)
		for i := range l.w32 {
			l.w32[i] = math.Float32frombits(binary.LittleEndian.Uint32(src[4*i:]))
		}
		return
	}
	l.w64 = make([]float64, n)
	for i := range l.w64 {
		l.w64[i] = math.Float64frombits(binary.LittleEndian.Uint64(src[8*i:]))
	}
}
