package classify

import (
	"bytes"
	"encoding/binary"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"time"

	"github.com/rhomb/rhomb/data/prep"
	"github.com/rhomb/rhomb/internal/container"
)

// The layout and the container-level limits of docs/model-file.md, format
// version 1, live in internal/container (standard library only), shared
// with the training library's reader; what follows bounds and mirrors the
// graph, which this package decodes itself. The graph's constants are
// restated rather than imported because this package must not link the
// training code.
const (
	prefixLen     = container.PrefixLen
	maxNodes      = container.MaxNodes
	polyMaxDegree = 64
	// maxFitCost caps Σ(d+1)² over the poly-relu nodes, as the training
	// library's reader does, so that a hostile header cannot buy unbounded
	// fitting work.
	maxFitCost = container.MaxFitCost
	// polyPointsPerCoef is the training library's number of least-squares
	// points per coefficient (net.PolyPointsPerCoef).
	polyPointsPerCoef = 50
)

// Sentinel causes carried by FileError; errors.Is finds them. The
// container-level ones are the same values as net/modelfile's.
var (
	ErrMagic     = container.ErrMagic
	ErrVersion   = container.ErrVersion
	ErrTruncated = container.ErrTruncated
	ErrChecksum  = container.ErrChecksum
	ErrHeader    = container.ErrHeader
	ErrShape     = errors.New("tensors do not fit the network")
	ErrWeight    = errors.New("a weight is NaN or infinite")
)

// FileError reports a model file that cannot be used, and where. Offset
// is the byte offset of the problem, or -1.
type FileError struct {
	Source string
	Offset int64
	Err    error  // one of the sentinels above
	What   string // details
}

func (e *FileError) Error() string {
	where := e.Source
	if where == "" {
		where = "model file"
	}
	if e.Offset >= 0 {
		where += fmt.Sprintf(" at byte %d", e.Offset)
	}
	msg := "classify: " + where + ": " + e.Err.Error()
	if e.What != "" {
		msg += ": " + e.What
	}
	return msg
}

func (e *FileError) Unwrap() error { return e.Err }

type fileHeader struct {
	Format        string            `json:"format"`
	Library       string            `json:"library"`
	Created       string            `json:"created"`
	DType         string            `json:"dtype"`
	Inputs        int               `json:"inputs"`
	Graph         []json.RawMessage `json:"graph"`
	Normalization *struct {
		Scale        string   `json:"scale"`
		Hold         string   `json:"hold"`
		PerUnit      bool     `json:"per_unit"`
		SkipReadout  bool     `json:"skip_readout"`
		NoRetraction bool     `json:"no_retraction"`
		Layers       []string `json:"layers"`
	} `json:"normalization"`
	Tensors    []container.Tensor `json:"tensors"`
	Pipeline   json.RawMessage    `json:"pipeline"`
	Classes    []string           `json:"classes"`
	Label      string             `json:"label"`
	Loss       string             `json:"loss"`
	Training   json.RawMessage    `json:"training"`
	Metrics    map[string]any     `json:"metrics"`
	Checkpoint json.RawMessage    `json:"checkpoint"`
}

type fileNode struct {
	Name      string  `json:"name"`
	Kind      string  `json:"kind"`
	Units     int     `json:"units"`
	Sharpness float64 `json:"sharpness"`
	Degree    int     `json:"degree"`
	Lo        float64 `json:"lo"`
	Hi        float64 `json:"hi"`
	Fit       string  `json:"fit"`
	// Coefficients, when present, are the training library's fit, used as
	// they are.
	Coefficients []float64 `json:"coefficients"`
}

// Load reads and validates the model file at path; see Read.
func Load(path string) (*Model, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("classify: %w", err)
	}
	return Read(b, path)
}

// Read decodes and validates a model file held in b; source names it in
// errors. It checks everything docs/model-file.md asks of a reader —
// magic and version, every size and offset against len(b) before anything
// is allocated from it, that the tensors tile the data region, the
// SHA-256 checksum, the graph's widths against the weight tensors, finite
// weights, a valid preprocessing pipeline of the network's input width —
// and reports the first problem as a *FileError. b is not retained.
func Read(b []byte, source string) (*Model, error) {
	fail := func(off int64, err error, format string, args ...any) (*Model, error) {
		return nil, &FileError{Source: source, Offset: off, Err: err, What: fmt.Sprintf(format, args...)}
	}
	// internal/container checks what the training library's reader checks
	// too (prefix, tensor table, checksum); the header is decoded, and its
	// dtype checked, inside the callback, before the tensor table.
	var h fileHeader
	f, err := container.Parse(b, func(raw []byte) ([]container.Tensor, error) {
		if err := container.DecodeHeader(raw, &h, &h.Format); err != nil {
			return nil, err
		}
		if h.DType != "float32" && h.DType != "float64" {
			return nil, fmt.Errorf("dtype %q, want float32 or float64", h.DType)
		}
		return h.Tensors, nil
	})
	if err != nil {
		ce := err.(*container.Error)
		return nil, &FileError{Source: source, Offset: ce.Offset, Err: ce.Err, What: ce.What}
	}
	byName, dataStart, sum := f.ByName, f.DataStart, f.Sum

	// The graph: kinds and settings, widths, and each dense layer's
	// weights, checked before any layer is built.
	if len(h.Graph) > maxNodes {
		return fail(prefixLen, ErrHeader, "%d nodes exceed the limit of %d", len(h.Graph), maxNodes)
	}
	if len(h.Graph) == 0 {
		return fail(prefixLen, ErrHeader, "the graph has no nodes")
	}
	if h.Inputs < 1 {
		return fail(prefixLen, ErrHeader, "inputs %d; want at least one feature", h.Inputs)
	}
	nodes := make([]fileNode, len(h.Graph))
	fitCost := 0
	for i, raw := range h.Graph {
		d := json.NewDecoder(bytes.NewReader(raw))
		d.DisallowUnknownFields()
		if err := d.Decode(&nodes[i]); err != nil {
			return fail(prefixLen, ErrHeader, "graph node %d: %v", i, err)
		}
		if s := nodes[i]; s.Kind == "poly-relu" && s.Degree > 0 && s.Degree <= polyMaxDegree {
			fitCost += (s.Degree + 1) * (s.Degree + 1)
		}
	}
	if fitCost > maxFitCost {
		return fail(prefixLen, ErrHeader, "polynomial activations of total size %d exceed the limit of %d", fitCost, maxFitCost)
	}
	data := f.Data
	m := &Model{features: h.Inputs, dtype: h.DType}
	seen := make(map[string]bool, len(nodes))
	width := h.Inputs
	for i, s := range nodes {
		bad := func(format string, args ...any) (*Model, error) {
			return fail(prefixLen, ErrShape, "node %d %q (%s): %s", i, s.Name, s.Kind, fmt.Sprintf(format, args...))
		}
		if s.Name == "" {
			return bad("no name")
		}
		if seen[s.Name] {
			return bad("duplicate name")
		}
		seen[s.Name] = true
		if s.Kind == "readout" && i != len(nodes)-1 {
			return bad("the readout must be the last node")
		}
		if i == len(nodes)-1 && s.Kind != "readout" {
			return bad("the last node must be the readout layer")
		}
		l := layer{in: width, out: width}
		switch s.Kind {
		case "constant-one":
			if i != 0 {
				return bad("the constant feature must be the first node")
			}
			l.kind = kindOne
			l.out = width + 1
		case "dense", "readout":
			if s.Units < 1 {
				return bad("%d units; a dense layer needs at least one", s.Units)
			}
			t := byName[s.Name+".W"]
			if t == nil || t.Role != "weight" || len(t.Shape) != 2 || t.Shape[0] != s.Units || t.Shape[1] != width {
				return bad("want a weight tensor %q of shape [%d %d]", s.Name+".W", s.Units, width)
			}
			if t.DType != h.DType {
				return bad("weight tensor %q is %s in a %s model", t.Name, t.DType, h.DType)
			}
			l.kind = kindDense
			l.out = s.Units
			if err := l.loadWeights(t, data); err != nil {
				return fail(dataStart+t.Offset, ErrWeight, "%v", err)
			}
		case "relu":
			l.kind = kindReLU
		case "smooth-relu":
			b := s.Sharpness
			if math.IsNaN(b) || math.IsInf(b, 0) || b <= 0 {
				return bad("sharpness %v; want a finite β > 0", b)
			}
			// The training library refuses a β whose value at 0,
			// log(2)/β, overflows its element type.
			if v := math.Ln2 / b; math.IsInf(v, 0) || (h.DType == "float32" && math.IsInf(float64(float32(v)), 0)) {
				return bad("sharpness %v is too small: log(2)/β overflows %s", b, h.DType)
			}
			l.kind = kindSmooth
			l.beta = b
		case "poly-relu":
			p, err := newPoly(s.Degree, s.Lo, s.Hi, s.Fit)
			if err != nil {
				return bad("%v", err)
			}
			if s.Coefficients != nil {
				if len(s.Coefficients) != s.Degree+1 {
					return bad("%d coefficients for degree %d", len(s.Coefficients), s.Degree)
				}
				for _, c := range s.Coefficients {
					if math.IsNaN(c) || math.IsInf(c, 0) {
						return bad("coefficient %v is not finite", c)
					}
				}
				p.c = append([]float64(nil), s.Coefficients...)
			}
			l.kind = kindPoly
			l.poly = p
		default:
			return bad("unknown node kind")
		}
		m.layers = append(m.layers, l)
		m.maxWidth = max(m.maxWidth, l.out)
		width = l.out
	}
	m.outputs = width
	m.maxWidth = max(m.maxWidth, h.Inputs)

	if len(h.Pipeline) > 0 && !bytes.Equal(bytes.TrimSpace(h.Pipeline), []byte("null")) {
		var p prep.Pipeline
		d := json.NewDecoder(bytes.NewReader(h.Pipeline))
		d.DisallowUnknownFields()
		if err := d.Decode(&p); err != nil {
			return fail(prefixLen, ErrHeader, "pipeline: %v", err)
		}
		if err := p.Validate(); err != nil {
			return fail(prefixLen, ErrHeader, "pipeline: %v", err)
		}
		if p.Width() != h.Inputs {
			return fail(prefixLen, ErrShape, "the pipeline makes %d features, the network takes %d", p.Width(), h.Inputs)
		}
		m.pipeline = &p
		m.inputs = p.Inputs()
		m.featureNames = p.FeatureNames()
	} else {
		m.featureNames = make([]string, h.Inputs)
		for i := range m.featureNames {
			m.featureNames[i] = fmt.Sprintf("x%d", i)
		}
	}
	if len(h.Classes) != 0 {
		want := m.outputs
		if want == 1 {
			want = 2
		}
		if len(h.Classes) != want {
			return fail(prefixLen, ErrShape, "%d class names for %d outputs (want %d)", len(h.Classes), m.outputs, want)
		}
	}

	info := Info{
		Version: hex.EncodeToString(sum[:8]), SHA256: hex.EncodeToString(sum[:]),
		Source: source, Library: h.Library, DType: h.DType, Features: h.Inputs, Outputs: m.outputs,
		Classes: h.Classes, Label: h.Label, Loss: h.Loss, Metrics: h.Metrics, Inputs: m.inputs,
		Checkpoint: len(h.Checkpoint) > 0 && !bytes.Equal(bytes.TrimSpace(h.Checkpoint), []byte("null")),
	}
	if h.Created != "" {
		if t, err := time.Parse(time.RFC3339, h.Created); err == nil {
			info.Created = t
		}
	}
	if h.Normalization != nil {
		info.Normalization = h.Normalization.Scale
	}
	for i, s := range nodes {
		info.Graph = append(info.Graph, Node{Name: s.Name, Kind: s.Kind, In: m.layers[i].in, Out: m.layers[i].out})
	}
	m.info = info
	m.classes = h.Classes
	return m, nil
}

// loadWeights copies a weight tensor out of the file, in the file's own
// element type, and refuses a NaN or infinite weight.
func (l *layer) loadWeights(t *container.Tensor, data []byte) error {
	n := l.in * l.out
	src := data[t.Offset:]
	if t.DType == "float32" {
		l.w32 = make([]float32, n)
		for i := range l.w32 {
			v := math.Float32frombits(binary.LittleEndian.Uint32(src[4*i:]))
			if f := float64(v); math.IsNaN(f) || math.IsInf(f, 0) {
				return fmt.Errorf("tensor %q: value %d (row %d, column %d) is %v", t.Name, i, i/l.in, i%l.in, v)
			}
			l.w32[i] = v
		}
		return nil
	}
	l.w64 = make([]float64, n)
	for i := range l.w64 {
		v := math.Float64frombits(binary.LittleEndian.Uint64(src[8*i:]))
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("tensor %q: value %d (row %d, column %d) is %v", t.Name, i, i/l.in, i%l.in, v)
		}
		l.w64[i] = v
	}
	return nil
}
