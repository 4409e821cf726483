package schema

import (
	"bytes"
	"encoding/binary"
	"encoding/json"
	"fmt"
	"math"
	"slices"

	"github.com/rhomb/rhomb/data/prep"
	"github.com/rhomb/rhomb/internal/arith"
	"github.com/rhomb/rhomb/internal/container"
)

// File is a model file that passed every check of Parse. Its slices alias
// the bytes given to Parse.
type File struct {
	Header Header
	// Widths holds each graph node's input and output width.
	Widths [][2]int
	// Outputs is the network's output width.
	Outputs int
	// Pipeline is the decoded preprocessing, or nil when the inputs are
	// features already.
	Pipeline *prep.Pipeline
	// Trainable names the parameters a trainer updates, in the order it
	// keeps them (package normalize's order for a normalized model, the
	// dense layers' W otherwise), with their shapes.
	Trainable []Param
	// Running names the batch-norm nodes' running statistics (mean, then
	// variance, per node in graph order), each 1×width.
	Running   []Param
	Data      []byte // the tensor data region
	DataStart int64  // offset of Data in the file
	ByName    map[string]*Tensor
	Sum       [SumLen]byte // the file's SHA-256 checksum
}

// Param is one trainable parameter: its tensor's name and shape.
type Param struct {
	Name       string
	Rows, Cols int
}

// Parse checks the model file b; source names it in errors. Beyond the
// container (prefix, header length, tensor table, checksum; see
// internal/container) it checks, in this order: the header's fields (no
// unknown field anywhere, format, dtype, inputs, the graph's size and
// fitting cost); each node (a unique name, a known kind in its place,
// its settings, a weight tensor of its shape and dtype for a dense
// layer; for a batch-norm node its ε, its scale and shift arrays as its
// settings say and its running mean and variance, the variance ≥ 0); the
// class names (as many as the outputs, none twice); the
// pipeline (valid, as wide as the inputs); the normalized parameters
// (exactly those the normalization makes, of their shapes, with W = ρ·V
// bit for bit; no batch-norm node with a normalization); the
// checkpoint's tensors (present exactly with a checkpoint, one per
// trainable parameter or none; kept ones also one per running statistic); that every tensor has
// a known role and belongs to the model; and that every floating-point
// tensor holds finite numbers. The first problem is returned as an
// *Error naming source and the byte offset.
func Parse(b []byte, source string) (*File, error) {
	p := &parser{source: source}
	cf, err := container.Parse(b, func(raw []byte, version uint32) ([]container.Tensor, error) {
		if err := prescan(raw); err != nil {
			return nil, err
		}
		if err := decodeHeader(raw, version, &p.f.Header); err != nil {
			return nil, err
		}
		h := &p.f.Header
		if h.Format != Format {
			return nil, fmt.Errorf("format %q, want %q", h.Format, Format)
		}
		if h.DType != Float32 && h.DType != Float64 {
			return nil, fmt.Errorf("dtype %q, want float32 or float64", h.DType)
		}
		return h.Tensors, nil
	})
	if err != nil {
		ce := err.(*container.Error)
		return nil, &Error{File: source, Offset: ce.Offset, Err: ce.Err, What: ce.What}
	}
	f := &p.f
	f.Data, f.DataStart, f.ByName, f.Sum = cf.Data, cf.DataStart, cf.ByName, cf.Sum
	f.Header.Tensors = cf.Tensors
	for _, step := range []func() error{p.graph, p.classes, p.pipeline, p.normalization, p.checkpoint, p.tensors, p.decision} {
		if err := step(); err != nil {
			return nil, err
		}
	}
	return f, nil
}

// decodeHeader decodes the header of a file of the given format version
// strictly: version 1 named the array table "tensors", its entries'
// fields "dtype", "shape" and "offset".
func decodeHeader(raw []byte, version uint32, h *Header) error {
	if version >= 2 {
		return decodeStrict(raw, h)
	}
	var v1 struct {
		Header
		Tensors []container.TensorV1 `json:"tensors"`
	}
	if err := decodeStrict(raw, &v1); err != nil {
		return err
	}
	if v1.Header.Tensors != nil {
		return fmt.Errorf(`a version-1 header with the version-2 field "arrays"`)
	}
	*h = v1.Header
	for _, t := range v1.Tensors {
		h.Tensors = append(h.Tensors, t.V2())
	}
	return nil
}

// decodeStrict decodes JSON refusing fields v does not have, and anything
// after the value.
func decodeStrict(raw []byte, v any) error {
	d := json.NewDecoder(bytes.NewReader(raw))
	d.DisallowUnknownFields()
	if err := d.Decode(v); err != nil {
		return err
	}
	if d.More() {
		return fmt.Errorf("data after the header's JSON value")
	}
	return nil
}

type parser struct {
	source string
	f      File
	// used marks the tensors the model accounts for.
	used map[string]bool
}

func (p *parser) fail(off int64, err error, format string, args ...any) error {
	return &Error{File: p.source, Offset: off, Err: err, What: fmt.Sprintf(format, args...)}
}

func (p *parser) header(err error, format string, args ...any) error {
	return p.fail(PrefixLen, err, format, args...)
}

// use marks a tensor as part of the model and checks its role, dtype and
// shape.
func (p *parser) use(name, role, dtype string, shape ...int) (*Tensor, error) {
	t := p.f.ByName[name]
	if t == nil {
		return nil, p.header(ErrShape, "tensor %q (%s) is missing", name, role)
	}
	if t.Role != role || t.DType != dtype || !slices.Equal(t.Shape, shape) {
		return nil, p.header(ErrShape, "tensor %q: role %s, %s of shape %v; want %s, %s of shape %v", name, t.Role, t.DType, t.Shape, role, dtype, shape)
	}
	if p.used == nil {
		p.used = make(map[string]bool)
	}
	p.used[name] = true
	return t, nil
}

func (p *parser) graph() error {
	h := &p.f.Header
	if h.Inputs < 1 {
		return p.header(ErrHeader, "inputs %d; want at least one feature", h.Inputs)
	}
	if len(h.Graph) == 0 {
		return p.header(ErrHeader, "the graph has no nodes")
	}
	if len(h.Graph) > MaxNodes {
		return p.header(ErrHeader, "%d nodes exceed the limit of %d", len(h.Graph), MaxNodes)
	}
	cost := 0
	for _, s := range h.Graph {
		if s.Kind == KindPolyReLU && s.Degree > 0 && s.Degree <= arith.PolyMaxDegree {
			cost += (s.Degree + 1) * (s.Degree + 1)
		}
	}
	if cost > MaxFitCost {
		return p.header(ErrHeader, "polynomial activations of total size %d exceed the limit of %d", cost, MaxFitCost)
	}
	seen := make(map[string]bool, len(h.Graph))
	width := h.Inputs
	last := len(h.Graph) - 1
	for i, s := range h.Graph {
		bad := func(format string, args ...any) error {
			return p.header(ErrShape, "node %d %q (%s): %s", i, s.Name, s.Kind, fmt.Sprintf(format, args...))
		}
		if s.Name == "" {
			return bad("no name")
		}
		if seen[s.Name] {
			return bad("duplicate name")
		}
		seen[s.Name] = true
		if s.Kind == KindReadout && i != last {
			return bad("the readout must be the last node")
		}
		if i == last && s.Kind != KindReadout {
			return bad("the last node must be the readout layer")
		}
		// Settings that belong to other kinds must be absent, so that a
		// node means one thing to every reader.
		if s.Kind != KindDense && s.Kind != KindReadout && s.Units != 0 {
			return bad("units belong to dense layers")
		}
		if s.Kind != KindSmoothReLU && s.Sharpness != 0 {
			return bad("sharpness belongs to smooth-relu nodes")
		}
		if s.Kind != KindPolyReLU && (s.Degree != 0 || s.Lo != 0 || s.Hi != 0 || s.Fit != "" || s.Coefficients != nil) {
			return bad("degree, lo, hi, fit and coefficients belong to poly-relu nodes")
		}
		if s.Kind != KindBatchNorm && (s.Scale || s.Shift || s.Epsilon != 0) {
			return bad("scale, shift and epsilon belong to batch-norm nodes")
		}
		out := width
		switch s.Kind {
		case KindConstantOne:
			if i != 0 {
				return bad("the constant feature must be the first node")
			}
			out = width + 1
		case KindDense, KindReadout:
			if s.Units < 1 {
				return bad("%d units; a dense layer needs at least one", s.Units)
			}
			if _, err := p.use(s.Name+".W", RoleWeight, h.DType, s.Units, width); err != nil {
				return err
			}
			out = s.Units
		case KindReLU:
		case KindBatchNorm:
			if err := p.batchNorm(s, width); err != nil {
				return err
			}
		case KindSmoothReLU:
			var err error
			if h.DType == Float32 {
				err = arith.CheckSharpness[float32](s.Sharpness)
			} else {
				err = arith.CheckSharpness[float64](s.Sharpness)
			}
			if err != nil {
				return bad("%v", err)
			}
		case KindPolyReLU:
			if err := arith.CheckPoly(s.Degree, s.Lo, s.Hi); err != nil {
				return bad("%v", err)
			}
			if s.Fit != FitLeastSquares && s.Fit != FitInterpolation {
				return bad("fit %q; want %q or %q", s.Fit, FitLeastSquares, FitInterpolation)
			}
			if s.Coefficients != nil && len(s.Coefficients) != s.Degree+1 {
				return bad("%d coefficients for degree %d", len(s.Coefficients), s.Degree)
			}
			for _, c := range s.Coefficients {
				if math.IsNaN(c) || math.IsInf(c, 0) {
					return bad("coefficient %v is not finite", c)
				}
			}
		default:
			return bad("unknown node kind")
		}
		p.f.Widths = append(p.f.Widths, [2]int{width, out})
		width = out
	}
	p.f.Outputs = width
	return nil
}

// batchNorm checks a batch-norm node of the given width: a finite ε > 0,
// its scale and shift arrays exactly as its settings say, and its running
// mean and variance, the variance at least 0 (a unit whose values never
// varied has variance 0; ε keeps the division finite). Finiteness is
// checked with every other array (tensors).
func (p *parser) batchNorm(s Node, width int) error {
	h := &p.f.Header
	if math.IsNaN(s.Epsilon) || math.IsInf(s.Epsilon, 0) || !(s.Epsilon > 0) {
		return p.header(ErrShape, "node %q (%s): epsilon %v; want a finite number > 0 (1e-5 is usual)", s.Name, s.Kind, s.Epsilon)
	}
	for _, q := range []struct {
		on   bool
		name string
	}{{s.Scale, s.Name + ".scale"}, {s.Shift, s.Name + ".shift"}} {
		if q.on {
			if _, err := p.use(q.name, RoleWeight, h.DType, 1, width); err != nil {
				return err
			}
		}
	}
	for _, name := range []string{s.Name + ".mean", s.Name + ".var"} {
		t, err := p.use(name, RoleRunning, h.DType, width)
		if err != nil {
			return err
		}
		p.f.Running = append(p.f.Running, Param{name, 1, width})
		if name == s.Name+".var" {
			for k := range width {
				if v := p.value(t, k); !(v >= 0) {
					return p.fail(p.f.DataStart+t.Offset, ErrShape, "tensor %q: value %d is %v; a variance must be a number ≥ 0", name, k, v)
				}
			}
		}
	}
	return nil
}

func (p *parser) classes() error {
	h := &p.f.Header
	if len(h.Classes) == 0 {
		return nil
	}
	want := max(p.f.Outputs, 2)
	if len(h.Classes) != want {
		return p.header(ErrShape, "%d class names for %d outputs (want %d)", len(h.Classes), p.f.Outputs, want)
	}
	seen := make(map[string]bool, len(h.Classes))
	for _, c := range h.Classes {
		if seen[c] {
			return p.header(ErrHeader, "class %q is named twice", c)
		}
		seen[c] = true
	}
	return nil
}

func (p *parser) pipeline() error {
	h := &p.f.Header
	if len(h.Pipeline) == 0 || bytes.Equal(bytes.TrimSpace(h.Pipeline), []byte("null")) {
		return nil
	}
	var pl prep.Pipeline
	if err := decodeStrict(h.Pipeline, &pl); err != nil {
		return p.header(ErrHeader, "pipeline: %v", err)
	}
	if err := pl.Validate(); err != nil {
		return p.header(ErrHeader, "pipeline: %v", err)
	}
	if pl.Width() != h.Inputs {
		return p.header(ErrShape, "the pipeline makes %d features, the network takes %d", pl.Width(), h.Inputs)
	}
	p.f.Pipeline = &pl
	return nil
}

// normalization checks the parameters of a normalized model against what
// its normalization makes (docs/model-file.md; package normalize writes
// them), and fills in Trainable.
func (p *parser) normalization() error {
	h := &p.f.Header
	n := h.Normalization
	dense := func(yield func(i int, s Node) bool) {
		for i, s := range h.Graph {
			if s.Kind == KindDense || s.Kind == KindReadout {
				if !yield(i, s) {
					return
				}
			}
		}
	}
	if n == nil {
		// The network's own parameters, in node order: each dense
		// layer's W, each batch-norm node's scale and shift.
		for i, s := range h.Graph {
			w := p.f.Widths[i]
			switch {
			case s.Kind == KindDense || s.Kind == KindReadout:
				p.f.Trainable = append(p.f.Trainable, Param{s.Name + ".W", w[1], w[0]})
			case s.Kind == KindBatchNorm:
				if s.Scale {
					p.f.Trainable = append(p.f.Trainable, Param{s.Name + ".scale", 1, w[0]})
				}
				if s.Shift {
					p.f.Trainable = append(p.f.Trainable, Param{s.Name + ".shift", 1, w[0]})
				}
			}
		}
		return nil
	}
	bad := func(format string, args ...any) error {
		return p.header(ErrHeader, "normalization: "+format, args...)
	}
	if len(p.f.Running) > 0 {
		// Batch normalization makes a layer's output independent of the
		// scale of the weights before it: a scale ρ_k of that layer would
		// get no gradient from the data, only from the weight decay.
		return bad("a weight-normalized model cannot have batch-norm nodes: they make a layer's scale irrelevant")
	}
	if n.Scale != ScalePerLayer && n.Scale != ScaleGlobal {
		return bad("scale %q; want %q or %q", n.Scale, ScalePerLayer, ScaleGlobal)
	}
	if n.Hold != HoldMultiplier && n.Hold != HoldProjection {
		return bad("hold %q; want %q or %q", n.Hold, HoldMultiplier, HoldProjection)
	}
	if n.PerUnit && n.Scale == ScaleGlobal {
		return bad("per_unit and a global scale exclude each other")
	}
	isDense := make(map[string]bool)
	for _, s := range dense {
		isDense[s.Name] = true
	}
	for _, name := range n.Layers {
		if !isDense[name] {
			return bad("layers names %q, which is not a dense layer of the graph", name)
		}
	}
	global := ""
	for i, s := range dense {
		w := p.f.Widths[i]
		units, in := w[1], w[0]
		on := (len(n.Layers) == 0 || slices.Contains(n.Layers, s.Name)) && !(n.SkipReadout && s.Kind == KindReadout)
		if !on {
			p.f.Trainable = append(p.f.Trainable, Param{s.Name + ".W", units, in})
			continue
		}
		v := Param{s.Name + ".V", units, in}
		var rho Param
		switch {
		case n.Scale == ScaleGlobal:
			if global == "" {
				global = s.Name
				rho = Param{"rho", 1, 1}
				p.f.Trainable = append(p.f.Trainable, rho)
			}
			p.f.Trainable = append(p.f.Trainable, v)
		case n.PerUnit:
			rho = Param{s.Name + ".rho", units, 1}
			p.f.Trainable = append(p.f.Trainable, rho, v)
		default:
			rho = Param{s.Name + ".rho", 1, 1}
			p.f.Trainable = append(p.f.Trainable, rho, v)
		}
		if err := p.product(s.Name, rho, v, n.PerUnit, n.Scale == ScaleGlobal && global != s.Name); err != nil {
			return err
		}
	}
	if n.Scale == ScaleGlobal && global == "" {
		return bad("no layer is normalized")
	}
	return nil
}

// product checks the parameters ρ (rho; unused when one) and V of a
// normalized layer and that its stored W is ρ·V, element by element,
// rounded in the model's element type, as package normalize computes it.
func (p *parser) product(layer string, rho, v Param, perUnit, one bool) error {
	dt := p.f.Header.DType
	vt, err := p.use(v.Name, RoleParam, dt, v.Rows, v.Cols)
	if err != nil {
		return err
	}
	var rt *Tensor
	if !one {
		if rt, err = p.use(rho.Name, RoleParam, dt, rho.Rows, rho.Cols); err != nil {
			return err
		}
	}
	wt := p.f.ByName[layer+".W"]
	n := v.Rows * v.Cols
	for k := range n {
		s := 1.0
		if rt != nil {
			r := 0
			if perUnit {
				r = k / v.Cols
			}
			s = p.value(rt, r)
		}
		var want float64
		if dt == Float32 {
			want = float64(float32(s) * float32(p.value(vt, k)))
		} else {
			want = s * p.value(vt, k)
		}
		if got := p.value(wt, k); math.Float64bits(got) != math.Float64bits(want) && !(math.IsNaN(got) && math.IsNaN(want)) {
			return p.fail(p.f.DataStart+wt.Offset, ErrShape, "weight %q value %d is %v, but ρ·V gives %v", wt.Name, k, got, want)
		}
	}
	return nil
}

// value returns element k of a float tensor, widened to float64.
func (p *parser) value(t *Tensor, k int) float64 {
	if t.DType == Float32 {
		return float64(math.Float32frombits(binary.LittleEndian.Uint32(p.f.Data[t.Offset+4*int64(k):])))
	}
	return math.Float64frombits(binary.LittleEndian.Uint64(p.f.Data[t.Offset+8*int64(k):]))
}

func (p *parser) checkpoint() error {
	c := p.f.Header.Checkpoint
	if c == nil {
		return nil
	}
	for _, prefix := range []string{"velocity/", "kept/"} {
		role := RoleVelocity
		if prefix == "kept/" {
			role = RoleKept
		}
		// The best epoch's model is its parameters and its running
		// statistics; momentum belongs to the parameters only.
		arrays := p.f.Trainable
		if role == RoleKept {
			arrays = append(slices.Clip(arrays), p.f.Running...)
		}
		have := 0
		for _, q := range arrays {
			if p.f.ByName[prefix+q.Name] != nil {
				have++
			}
		}
		if have == 0 {
			continue
		}
		if have != len(arrays) {
			if extra := len(arrays) - len(p.f.Trainable); extra > 0 {
				return p.header(ErrShape, "%d %s tensors for %d trainable parameters and %d running statistics; want one each or none", have, role, len(p.f.Trainable), extra)
			}
			return p.header(ErrShape, "%d %s tensors for %d trainable parameters; want one each or none", have, role, len(p.f.Trainable))
		}
		for _, q := range arrays {
			if _, err := p.use(prefix+q.Name, role, Float64, q.Rows*q.Cols); err != nil {
				return err
			}
		}
	}
	t := p.f.ByName["order"]
	if t == nil || len(t.Shape) != 1 {
		return p.header(ErrShape, "checkpoint without its batch order")
	}
	_, err := p.use("order", RoleOrder, Int32, t.Shape[0])
	return err
}

// tensors refuses tensors the model does not account for and
// floating-point values that are not finite.
func (p *parser) tensors() error {
	for i := range p.f.Header.Tensors {
		t := &p.f.Header.Tensors[i]
		if !p.used[t.Name] {
			switch t.Role {
			case RoleWeight, RoleParam, RoleVelocity, RoleOrder, RoleKept, RoleRunning:
				return p.header(ErrShape, "tensor %q (%s) belongs to no part of the model", t.Name, t.Role)
			}
			return p.header(ErrHeader, "tensor %q: unknown role %q", t.Name, t.Role)
		}
		if t.DType == Int32 {
			continue
		}
		n := 1
		for _, d := range t.Shape {
			n *= d
		}
		cols := 1
		if len(t.Shape) > 0 {
			cols = max(t.Shape[len(t.Shape)-1], 1)
		}
		for k := range n {
			if v := p.value(t, k); math.IsNaN(v) || math.IsInf(v, 0) {
				cause := ErrShape
				if t.Role == RoleWeight {
					cause = ErrWeight
				}
				return p.fail(p.f.DataStart+t.Offset, cause, "tensor %q: value %d (row %d, column %d) is %v", t.Name, k, k/cols, k%cols, v)
			}
		}
	}
	return nil
}

// decision checks the maps a served model answers with.
func (p *parser) decision() error {
	d := p.f.Header.Decision
	if d == nil {
		return nil
	}
	finite := func(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
	bad := func(format string, args ...any) error {
		return p.header(ErrHeader, "decision: "+format, args...)
	}
	two := p.f.Outputs == 1
	if d.Threshold != nil && (!two || !finite(*d.Threshold)) {
		return bad("a threshold belongs to a two-class model with one signed score, and must be a finite number")
	}
	if c := d.Calibration; c != nil {
		switch {
		case c.Kind == CalibrationPlatt && two:
			if !finite(c.A) || !finite(c.B) || c.A <= 0 {
				return bad("Platt scaling with a = %v, b = %v; want finite numbers with a > 0", c.A, c.B)
			}
		case c.Kind == CalibrationTemperature && !two:
			if !finite(c.Temperature) || c.Temperature <= 0 {
				return bad("temperature %v; want a finite number > 0", c.Temperature)
			}
		default:
			return bad("calibration %q does not fit a model with %d outputs (Platt scaling for one signed score, temperature for several)", c.Kind, p.f.Outputs)
		}
	}
	if s := d.Sets; s != nil {
		if d.Calibration == nil {
			return bad("prediction sets need calibrated probabilities")
		}
		if !(s.Coverage > 0 && s.Coverage < 1) || !(s.Quantile >= 0 && s.Quantile <= 1) {
			return bad("sets with coverage %v and quantile %v; want 0 < coverage < 1 and 0 ≤ quantile ≤ 1", s.Coverage, s.Quantile)
		}
	}
	if a := d.Abstain; a != nil {
		if !finite(a.MarginFloor) || a.MarginFloor < 0 || !(a.TargetError > 0 && a.TargetError < 1) || !(a.Answered >= 0 && a.Answered <= 1) {
			return bad("abstain with margin floor %v, target error %v, answered %v; want a finite floor ≥ 0, 0 < target < 1, 0 ≤ answered ≤ 1", a.MarginFloor, a.TargetError, a.Answered)
		}
	}
	if d.Rows < 0 {
		return bad("rows %d", d.Rows)
	}
	return nil
}
