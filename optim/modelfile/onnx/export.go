package onnx

import (
	"encoding/json"
	"errors"
	"fmt"
	"github.com/rhomb/rhomb/internal/atomicfile"
	"github.com/rhomb/rhomb/net/schema"
	"io"
	"math"
	"slices"
	"strings"

	"github.com/rhomb/rhomb/data/prep"
	"github.com/rhomb/rhomb/internal/version"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/optim/modelfile"
)

// Names of the graph's inputs and outputs; see the package documentation
// for what each holds.
const (
	InputFeatures = "features" // the feature row, when no pipeline is folded in
	InputNumeric  = "numeric"  // raw values of the numeric columns
	InputOneHot   = "onehot"   // one-hot blocks of the categorical columns
	OutputScores  = "scores"   // the network's outputs
	OutputClass   = "class"    // the class index, int64
)

// Options adjusts Marshal. The zero value folds the model's pipeline into
// the graph (when it has one) and adds the class output.
type Options struct {
	// FeatureInput leaves the pipeline out: the graph's one input is the
	// feature row, as the pipeline writes it. For callers that already
	// run package prep themselves.
	FeatureInput bool
	// ScoresOnly leaves out the class output.
	ScoresOnly bool
}

// ErrUnsupported is wrapped by the *Error returned for a node, a weight or
// a pipeline setting that has no ONNX form here.
var ErrUnsupported = errors.New("does not export to ONNX")

// Error reports what could not be exported, and where.
type Error struct {
	// Node is the network node's name, Index its position in the chain;
	// Node is "" and Index −1 when the problem is not a node's.
	Node  string
	Index int
	// Kind is the node's kind, or "pipeline" or "model".
	Kind string
	Err  error
}

func (e *Error) Error() string {
	if e.Index < 0 {
		return fmt.Sprintf("onnx: %s: %v", e.Kind, e.Err)
	}
	return fmt.Sprintf("onnx: node %d %q (%s): %v", e.Index, e.Node, e.Kind, e.Err)
}

func (e *Error) Unwrap() error { return e.Err }

// Write encodes m as an ONNX model and writes it to w; see Marshal.
func Write[T net.Float](w io.Writer, m *modelfile.Model[T], o Options) error {
	b, err := Marshal(m, o)
	if err != nil {
		return err
	}
	_, err = w.Write(b)
	return err
}

// Save writes m as an ONNX model file at path; see Marshal.
func Save[T net.Float](path string, m *modelfile.Model[T], o Options) error {
	b, err := Marshal(m, o)
	if err != nil {
		return err
	}
	return atomicfile.WriteFile(path, b)
}

// Marshal encodes m's network, and its pipeline unless o.FeatureInput, as
// an ONNX ModelProto (IR version IRVersion, opset Opset) with float32
// weights. A normalized model's W are brought up to date (ρ·V) first, as
// modelfile.Write does. It returns an *Error for what cannot be expressed
// (see the package documentation).
func Marshal[T net.Float](m *modelfile.Model[T], o Options) ([]byte, error) {
	if m == nil || m.Network == nil {
		return nil, &Error{Index: -1, Kind: "model", Err: errors.New("the model has no network")}
	}
	if m.Normalized != nil {
		if m.Normalized.Base() != m.Network {
			return nil, &Error{Index: -1, Kind: "model", Err: errors.New("Normalized wraps a different network than Network")}
		}
		m.Normalized.Sync()
	}
	g := &graph{names: map[string]bool{}}
	n := m.Network
	var cur string
	var feature []string // what each feature of the network's input is
	var err error
	if m.Pipeline != nil && !o.FeatureInput {
		if cur, feature, err = g.pipeline(m.Pipeline, n.In()); err != nil {
			return nil, err
		}
	} else {
		cur = g.input(InputFeatures, n.In(), "the feature row: the network's input, one row per example")
		if m.Pipeline != nil {
			feature = m.Pipeline.FeatureNames()
		}
	}
	last := len(n.Nodes()) - 1
	for i, nd := range n.Nodes() {
		out := "node/" + escape(nd.Name())
		if i == last {
			out = OutputScores
		}
		fail := func(err error) error { return &Error{Node: nd.Name(), Index: i, Kind: nd.Kind(), Err: err} }
		switch v := nd.(type) {
		case *net.ConstantOne[T]:
			g.constantOne(cur, out)
		case *net.Dense[T]:
			wt, err := transpose32(v.W.Value, v.Out(), v.In())
			if err != nil {
				return nil, fail(err)
			}
			w := g.initF32(out+"/Wt", []int64{int64(v.In()), int64(v.Out())}, wt)
			g.op("MatMul", out, []string{cur, w}, out)
		case *net.ReLU[T]:
			g.op("Relu", out, []string{cur}, out)
		case *net.BatchNorm[T]:
			if err := batchNorm(g, cur, out, v); err != nil {
				return nil, fail(err)
			}
		case *net.SmoothReLU[T]:
			if err := g.smoothReLU(cur, out, v.Sharpness()); err != nil {
				return nil, fail(err)
			}
		case *net.PolyReLU[T]:
			if err := polyReLU(g, cur, out, v); err != nil {
				return nil, fail(err)
			}
		default:
			return nil, fail(fmt.Errorf("%w: no ONNX form is known for node kind %q (a custom node); only %s export", ErrUnsupported, nd.Kind(), strings.Join(exportable, ", ")))
		}
		cur = out
	}
	g.output(OutputScores, int64(n.Out()), dataTypeFloat, "the network's outputs, one score per class (one ±1 score for two classes)")
	if !o.ScoresOnly {
		threshold := float32(0)
		if d := m.Decision; d != nil && d.Threshold != nil {
			threshold = float32(*d.Threshold)
		}
		g.class(n.Out(), threshold)
	}
	return g.model(m.Classes, feature), nil
}

// escape makes a node name safe to build value names from: with no "/"
// left in it, "node/<name>/<part>" cannot collide between nodes.
func escape(name string) string {
	return strings.NewReplacer("%", "%25", "/", "%2F").Replace(name)
}

// exportable lists the node kinds Marshal handles, for error messages.
var exportable = []string{schema.KindConstantOne, schema.KindDense, schema.KindReadout, schema.KindReLU, schema.KindBatchNorm, schema.KindSmoothReLU, schema.KindPolyReLU}

// graph collects the pieces of a GraphProto.
type graph struct {
	nodes, inits, inputs, outputs []msg
	names                         map[string]bool // every value name, to keep them unique
	count                         int
}

// unique panics on a repeated value name: the names are derived from node
// names that Builder.Build has made unique, so a clash is a bug here.
func (g *graph) unique(name string) string {
	if g.names[name] {
		panic("onnx: value name " + name + " used twice")
	}
	g.names[name] = true
	return name
}

func (g *graph) op(opType, name string, inputs []string, output string, attrs ...msg) {
	var nd msg
	for _, in := range inputs {
		nd.str(nodeInput, in)
	}
	nd.str(nodeOutput, g.unique(output))
	g.count++
	nd.str(nodeName, fmt.Sprintf("%s#%d", name, g.count))
	nd.str(nodeOpType, opType)
	for _, a := range attrs {
		nd.sub(nodeAttribute, a)
	}
	g.nodes = append(g.nodes, nd)
}

func (g *graph) initF32(name string, dims []int64, v []float32) string {
	g.inits = append(g.inits, tensorF32(g.unique(name), dims, v))
	return name
}

func (g *graph) initI64(name string, dims []int64, v []int64) string {
	g.inits = append(g.inits, tensorI64(g.unique(name), dims, v))
	return name
}

// scalar returns the name of a one-element float initializer, which
// broadcasts against any tensor in the elementwise ops.
func (g *graph) scalar(name string, v float64) (string, error) {
	f, err := to32(v)
	if err != nil {
		return "", err
	}
	return g.initF32(name, nil, []float32{f}), nil
}

func (g *graph) input(name string, width int, doc string) string {
	g.inputs = append(g.inputs, valueInfo(g.unique(name), dataTypeFloat, []int64{-1, int64(width)}, doc))
	return name
}

func (g *graph) output(name string, width int64, elem int64, doc string) {
	dims := []int64{-1, width}
	if width < 0 {
		dims = []int64{-1}
	}
	g.outputs = append(g.outputs, valueInfo(name, elem, dims, doc))
}

// to32 rounds v to float32, refusing values that do not fit (they would
// become ±Inf) and NaN.
func to32(v float64) (float32, error) {
	f := float32(v)
	if math.IsNaN(v) || math.IsInf(float64(f), 0) {
		return 0, fmt.Errorf("%w: the value %v is not a finite float32", ErrUnsupported, v)
	}
	return f, nil
}

// transpose32 returns Wᵀ (in×out, row-major) of the out×in matrix w, in
// float32: rhomb's y = x·Wᵀ is ONNX's MatMul(x, Wᵀ).
func transpose32[T net.Float](w []T, out, in int) ([]float32, error) {
	t := make([]float32, len(w))
	for r := range out {
		for c := range in {
			f, err := to32(float64(w[r*in+c]))
			if err != nil {
				return nil, fmt.Errorf("weight [%d, %d]: %w", r, c, err)
			}
			t[c*out+r] = f
		}
	}
	return t, nil
}

// constantOne appends a column of ones: Expand a 1×1 initializer to N×1,
// N read from the input's shape, and Concat it after the features.
func (g *graph) constantOne(cur, out string) {
	rows := out + "/rows"
	g.op("Shape", out, []string{cur}, rows, attrInt("start", 0), attrInt("end", 1)) // [N]
	one64 := g.initI64(out+"/width", []int64{1}, []int64{1})
	shape := out + "/shape"
	g.op("Concat", out, []string{rows, one64}, shape, attrInt("axis", 0)) // [N, 1]
	one := g.initF32(out+"/one", []int64{1, 1}, []float32{1})
	ones := out + "/ones"
	g.op("Expand", out, []string{one, shape}, ones)
	g.op("Concat", out, []string{cur, ones}, out, attrInt("axis", 1))
}

// batchNorm writes the node's inference form as the standard
// BatchNormalization operator (training_mode 0, its default): inputs X,
// scale (γ, or ones), B (β, or zeros), input_mean and input_var (the
// running statistics), attribute epsilon; every value rounded to float32.
// The operator takes X as N×C (ONNX Operators.md: N × C × D1 … Dn, n ≥ 0).
func batchNorm[T net.Float](g *graph, cur, out string, b *net.BatchNorm[T]) error {
	w := b.Width()
	ones := make([]T, w)
	for i := range ones {
		ones[i] = 1
	}
	scale, shift := ones, make([]T, w)
	if b.Scale != nil {
		scale = b.Scale.Value
	}
	if b.Shift != nil {
		shift = b.Shift.Value
	}
	var names [4]string
	for k, part := range []struct {
		name string
		v    []T
	}{{"scale", scale}, {"shift", shift}, {"mean", b.Mean.Value}, {"var", b.Var.Value}} {
		f := make([]float32, w)
		for j, v := range part.v {
			var err error
			if f[j], err = to32(float64(v)); err != nil {
				return fmt.Errorf("%s of unit %d: %w", part.name, j, err)
			}
		}
		names[k] = g.initF32(out+"/"+part.name, []int64{int64(w)}, f)
	}
	eps, err := to32(b.Settings().Epsilon)
	if err != nil || eps <= 0 {
		return fmt.Errorf("%w: epsilon %v is not a positive float32", ErrUnsupported, b.Settings().Epsilon)
	}
	g.op("BatchNormalization", out, []string{cur, names[0], names[1], names[2], names[3]}, out, attrFloat("epsilon", eps))
	return nil
}

// smoothReLU writes log(1 + exp(βx))/β as Softplus(x·β)/β; for β = 1 the
// Mul and Div are left out.
func (g *graph) smoothReLU(cur, out string, beta float64) error {
	if beta == 1 {
		g.op("Softplus", out, []string{cur}, out)
		return nil
	}
	b, err := g.scalar(out+"/beta", beta)
	if err != nil {
		return fmt.Errorf("sharpness: %w", err)
	}
	g.op("Mul", out, []string{cur, b}, out+"/scaled")
	g.op("Softplus", out, []string{out + "/scaled"}, out+"/softplus")
	g.op("Div", out, []string{out + "/softplus", b}, out)
	return nil
}

// polyReLU writes the polynomial's Clenshaw recurrence with elementwise
// ops on t = (x − mid)·scale:
//
//	b_d = c_d,  b_k = c_k + 2t·b_{k+1} − b_{k+2} (k = d−1, …, 1),
//	p = c_0 + t·b_1 − b_2,
//
// the same recurrence, on the same scaled variable, as the node itself
// uses, but in float32 where the node works in float64 (see doc.go for
// what that costs). b_{d+1} = 0 is left out, and b_d is a scalar
// initializer that broadcasts.
func polyReLU[T net.Float](g *graph, cur, out string, p *net.PolyReLU[T]) error {
	c := p.Coefficients()
	if c == nil {
		return errors.New("the polynomial is not fitted (the network was not built)")
	}
	lo, hi := p.Interval()
	mid, scale := lo/2+hi/2, 2/(hi-lo) // as PolyReLU.Connect computes them
	fail := func(what string, err error) error { return fmt.Errorf("%s: %w", what, err) }
	m, err := g.scalar(out+"/mid", mid)
	if err != nil {
		return fail("interval midpoint", err)
	}
	s, err := g.scalar(out+"/scale", scale)
	if err != nil {
		return fail("interval scale", err)
	}
	coef := make([]string, len(c))
	for k, v := range c {
		if coef[k], err = g.scalar(fmt.Sprintf("%s/c%d", out, k), v); err != nil {
			return fail(fmt.Sprintf("Chebyshev coefficient %d", k), err)
		}
	}
	two, _ := g.scalar(out+"/two", 2)
	g.op("Sub", out, []string{cur, m}, out+"/centred")
	t := out + "/t"
	g.op("Mul", out, []string{out + "/centred", s}, t)
	t2 := out + "/2t"
	g.op("Mul", out, []string{t, two}, t2) // exact: a power of two
	d := len(c) - 1
	b1, b2 := coef[d], "" // b_{k+1}, b_{k+2}; "" is zero
	for k := d - 1; k >= 1; k-- {
		b := fmt.Sprintf("%s/b%d", out, k)
		g.op("Mul", out, []string{t2, b1}, b+"/prod")
		if b2 == "" {
			g.op("Add", out, []string{b + "/prod", coef[k]}, b)
		} else {
			g.op("Add", out, []string{b + "/prod", coef[k]}, b+"/sum")
			g.op("Sub", out, []string{b + "/sum", b2}, b)
		}
		b1, b2 = b, b1
	}
	g.op("Mul", out, []string{t, b1}, out+"/prod")
	if b2 == "" {
		g.op("Add", out, []string{out + "/prod", coef[0]}, out)
	} else {
		g.op("Add", out, []string{out + "/prod", coef[0]}, out+"/sum")
		g.op("Sub", out, []string{out + "/sum", b2}, out)
	}
	return nil
}

// pipeline folds p into the graph in front of the network and returns the
// name of the feature row it computes, and what each feature is. The
// numeric columns arrive raw in one input, the categorical columns' one-hot
// blocks in another; they are standardized, joined, put back in the
// pipeline's column order and, if p.UnitNorm, scaled to unit norm.
func (g *graph) pipeline(p *prep.Pipeline, width int) (string, []string, error) {
	fail := func(err error) (string, []string, error) {
		return "", nil, &Error{Index: -1, Kind: "pipeline", Err: err}
	}
	if err := p.Validate(); err != nil {
		return fail(err)
	}
	if w := p.Width(); w != width {
		return fail(fmt.Errorf("the pipeline writes %d features, the network reads %d", w, width))
	}
	names := p.FeatureNames()
	var numNames, catNames []string
	var mean, scale, fill []float32
	var numAt, catAt []int64 // feature positions of the numeric and one-hot features
	standardize, at := false, 0
	for i := range p.Encodings {
		s := &p.Encodings[i]
		if s.Kind == prep.Numeric {
			var vals [3]float32
			for j, v := range []float64{s.Mean, s.Scale, s.Fill} {
				f, err := to32(v)
				if err != nil || (j == 1 && f == 0) {
					return fail(fmt.Errorf("%w: column %q: mean %v, scale %v and fill %v must be float32 numbers, the scale non-zero", ErrUnsupported, s.Name, s.Mean, s.Scale, s.Fill))
				}
				vals[j] = f
			}
			mean, scale, fill = append(mean, vals[0]), append(scale, vals[1]), append(fill, vals[2])
			standardize = standardize || s.Mean != 0 || s.Scale != 1
			numNames = append(numNames, s.Name)
			numAt = append(numAt, int64(at))
			at++
			continue
		}
		for range s.Width() { // the categories' features, then any "other" feature
			catAt = append(catAt, int64(at))
			catNames = append(catNames, names[at])
			at++
		}
	}
	var parts []string
	if k := int64(len(numNames)); k > 0 {
		x := g.input(InputNumeric, len(numNames), "raw values of the numeric columns "+list(numNames)+", in that order"+
			map[bool]string{true: "; NaN marks a missing value, replaced by the training mean", false: ""}[p.Impute])
		if p.Impute {
			miss := "pre/missing"
			g.op("IsNaN", "pre/impute", []string{x}, miss)
			f := g.initF32("pre/fill", []int64{1, k}, fill)
			g.op("Where", "pre/impute", []string{miss, f, x}, "pre/imputed")
			x = "pre/imputed"
		}
		if standardize {
			m := g.initF32("pre/mean", []int64{1, k}, mean)
			s := g.initF32("pre/scale", []int64{1, k}, scale)
			g.op("Sub", "pre/standardize", []string{x, m}, "pre/centred")
			g.op("Div", "pre/standardize", []string{"pre/centred", s}, "pre/standardized")
			x = "pre/standardized"
		}
		parts = append(parts, x)
	}
	if len(catNames) > 0 {
		parts = append(parts, g.input(InputOneHot, len(catNames), "one-hot blocks of the categorical columns, as package prep encodes them: "+list(catNames)))
	}
	cur := parts[0]
	if len(parts) == 2 {
		g.op("Concat", "pre/join", parts, "pre/joined", attrInt("axis", 1))
		cur = "pre/joined"
	}
	// joined position j holds feature order[j]; Gather picks, for each
	// feature position, the joined column that holds it.
	order := append(numAt, catAt...)
	if !slices.IsSorted(order) {
		perm := make([]int64, len(order))
		for j, f := range order {
			perm[f] = int64(j)
		}
		idx := g.initI64("pre/order", []int64{int64(len(perm))}, perm)
		g.op("Gather", "pre/order", []string{cur, idx}, "pre/features", attrInt("axis", 1))
		cur = "pre/features"
	}
	if p.UnitNorm {
		g.op("LpNormalization", "pre/unit-norm", []string{cur}, "pre/unit", attrInt("axis", 1), attrInt("p", 2))
		cur = "pre/unit"
	}
	return cur, names, nil
}

func list(names []string) string {
	b, _ := json.Marshal(names)
	return string(b)
}

// class adds the class output: ArgMax over the scores (the first largest,
// as rhomb's data.ClassOf), or, for a single ±1 score, 1 where it is above
// the model's decision threshold (0 unless the model file holds one;
// rounded to float32, the graph's type) and 0 elsewhere.
func (g *graph) class(outputs int, threshold float32) {
	if outputs > 1 {
		g.op("ArgMax", "class", []string{OutputScores}, OutputClass, attrInt("axis", 1), attrInt("keepdims", 0), attrInt("select_last_index", 0))
	} else {
		cut := g.initF32("class/threshold", nil, []float32{threshold})
		g.op("Greater", "class", []string{OutputScores, cut}, "class/positive")
		g.op("Cast", "class", []string{"class/positive"}, "class/index", attrInt("to", dataTypeInt64))
		flat := g.initI64("class/flat", []int64{1}, []int64{-1})
		g.op("Reshape", "class", []string{"class/index", flat}, OutputClass)
	}
	g.output(OutputClass, -1, dataTypeInt64, "the class index: into the model's classes")
}

// model assembles the ModelProto. The metadata records, as JSON arrays,
// the class names and the features in order, so that a consumer can check
// it feeds the inputs it means to.
func (g *graph) model(classes, features []string) []byte {
	var gr msg
	for _, n := range g.nodes {
		gr.sub(graphNode, n)
	}
	gr.str(graphName, "rhomb")
	for _, t := range g.inits {
		gr.sub(graphInitializer, t)
	}
	gr.str(graphDocString, "a bias-free classifier exported by rhomb")
	for _, v := range g.inputs {
		gr.sub(graphInput, v)
	}
	for _, v := range g.outputs {
		gr.sub(graphOutput, v)
	}
	var md msg
	md.varint(modelIRVersion, IRVersion)
	md.str(modelProducerName, "rhomb")
	md.str(modelProducerVersion, version.Version)
	md.sub(modelGraph, gr)
	var opset msg
	opset.str(opsetDomain, "")
	opset.varint(opsetVersion, Opset)
	md.sub(modelOpsetImport, opset)
	meta := func(k string, v []string) {
		if v == nil {
			return
		}
		var e msg
		e.str(entryKey, k)
		e.str(entryValue, list(v))
		md.sub(modelMetadataProps, e)
	}
	meta("rhomb.classes", classes)
	meta("rhomb.features", features)
	return md
}
