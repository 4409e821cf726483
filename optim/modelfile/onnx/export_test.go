package onnx

import (
	"bytes"
	"encoding/binary"
	"encoding/json"
	"errors"
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"google.golang.org/protobuf/encoding/protowire"

	"github.com/rhomb/rhomb/data/prep"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/net/schema"
	"github.com/rhomb/rhomb/optim/modelfile"
)

// A minimal ONNX reader, written for the tests with protowire's Consume
// functions and its own field numbers, typed in again from onnx.proto
// (onnx/onnx, onnx/onnx.proto) rather than taken from wire.go, so that a
// wrong constant there shows up as a decoding failure here.

type field struct {
	num protowire.Number
	typ protowire.Type
	v   uint64 // varint and fixed values
	b   []byte // length-delimited values
}

func decode(t *testing.T, b []byte) []field {
	t.Helper()
	var fs []field
	for len(b) > 0 {
		num, typ, n := protowire.ConsumeTag(b)
		if n < 0 {
			t.Fatalf("bad tag: %v", protowire.ParseError(n))
		}
		b = b[n:]
		f := field{num: num, typ: typ}
		switch typ {
		case protowire.VarintType:
			f.v, n = protowire.ConsumeVarint(b)
		case protowire.Fixed32Type:
			var v uint32
			v, n = protowire.ConsumeFixed32(b)
			f.v = uint64(v)
		case protowire.Fixed64Type:
			f.v, n = protowire.ConsumeFixed64(b)
		case protowire.BytesType:
			f.b, n = protowire.ConsumeBytes(b)
		default:
			t.Fatalf("field %d: unexpected wire type %d", num, typ)
		}
		if n < 0 {
			t.Fatalf("field %d: %v", num, protowire.ParseError(n))
		}
		b = b[n:]
		fs = append(fs, f)
	}
	return fs
}

func all(fs []field, num protowire.Number) []field {
	var out []field
	for _, f := range fs {
		if f.num == num {
			out = append(out, f)
		}
	}
	return out
}

func one(t *testing.T, fs []field, num protowire.Number) field {
	t.Helper()
	a := all(fs, num)
	if len(a) != 1 {
		t.Fatalf("field %d: %d occurrences, want 1", num, len(a))
	}
	return a[0]
}

func strs(fs []field, num protowire.Number) []string {
	var out []string
	for _, f := range all(fs, num) {
		out = append(out, string(f.b))
	}
	return out
}

type dNode struct {
	op      string
	in, out []string
	attrs   map[string]int64   // the INT attributes
	floats  map[string]float32 // the FLOAT attributes
}

type dTensor struct {
	dims  []int64
	dtype uint64
	raw   []byte
}

func (d dTensor) floats() []float32 {
	v := make([]float32, len(d.raw)/4)
	for i := range v {
		v[i] = math.Float32frombits(binary.LittleEndian.Uint32(d.raw[4*i:]))
	}
	return v
}

func (d dTensor) int64s() []int64 {
	v := make([]int64, len(d.raw)/8)
	for i := range v {
		v[i] = int64(binary.LittleEndian.Uint64(d.raw[8*i:]))
	}
	return v
}

type dValue struct {
	elem uint64
	dims []string // "N" for the symbolic batch, else the number
}

type dModel struct {
	ir       uint64
	opsets   map[string]uint64
	producer string
	nodes    []dNode
	inits    map[string]dTensor
	inputs   []string
	outputs  []string
	values   map[string]dValue // the inputs' and outputs' types
	meta     map[string]string
}

// decodeModel reads the parts of a ModelProto the export writes. Field
// numbers from onnx.proto: ModelProto ir_version 1, producer_name 2,
// graph 7, opset_import 8, metadata_props 14; OperatorSetIdProto domain 1,
// version 2; GraphProto node 1, initializer 5, input 11, output 12;
// NodeProto input 1, output 2, op_type 4, attribute 5; AttributeProto
// name 1, f 2 (fixed32), i 3, type 20 (FLOAT = 1, INT = 2); TensorProto dims 1, data_type 2, name 8,
// raw_data 9; ValueInfoProto name 1, type 2; TypeProto tensor_type 1;
// TypeProto.Tensor elem_type 1, shape 2; TensorShapeProto dim 1;
// Dimension dim_value 1, dim_param 2; StringStringEntryProto key 1,
// value 2.
func decodeModel(t *testing.T, b []byte) dModel {
	t.Helper()
	m := dModel{opsets: map[string]uint64{}, inits: map[string]dTensor{}, values: map[string]dValue{}, meta: map[string]string{}}
	top := decode(t, b)
	m.ir = one(t, top, 1).v
	m.producer = string(one(t, top, 2).b)
	for _, o := range all(top, 8) {
		fs := decode(t, o.b)
		var dom string
		if d := all(fs, 1); len(d) == 1 {
			dom = string(d[0].b)
		}
		m.opsets[dom] = one(t, fs, 2).v
	}
	for _, e := range all(top, 14) {
		fs := decode(t, e.b)
		m.meta[string(one(t, fs, 1).b)] = string(one(t, fs, 2).b)
	}
	g := decode(t, one(t, top, 7).b)
	for _, nf := range all(g, 1) {
		fs := decode(t, nf.b)
		nd := dNode{op: string(one(t, fs, 4).b), in: strs(fs, 1), out: strs(fs, 2), attrs: map[string]int64{}, floats: map[string]float32{}}
		for _, af := range all(fs, 5) {
			a := decode(t, af.b)
			switch typ := one(t, a, 20).v; typ {
			case 2:
				nd.attrs[string(one(t, a, 1).b)] = int64(one(t, a, 3).v)
			case 1:
				f := one(t, a, 2)
				if f.typ != protowire.Fixed32Type {
					t.Fatalf("%s: FLOAT attribute with wire type %d, want fixed32", nd.op, f.typ)
				}
				nd.floats[string(one(t, a, 1).b)] = math.Float32frombits(uint32(f.v))
			default:
				t.Fatalf("%s: attribute of type %d; the export writes INT (2) and FLOAT (1) only", nd.op, typ)
			}
		}
		m.nodes = append(m.nodes, nd)
	}
	for _, tf := range all(g, 5) {
		fs := decode(t, tf.b)
		var d dTensor
		for _, f := range all(fs, 1) {
			d.dims = append(d.dims, int64(f.v))
		}
		d.dtype = one(t, fs, 2).v
		d.raw = one(t, fs, 9).b
		m.inits[string(one(t, fs, 8).b)] = d
	}
	value := func(f field) string {
		fs := decode(t, f.b)
		name := string(one(t, fs, 1).b)
		tt := decode(t, one(t, decode(t, one(t, fs, 2).b), 1).b)
		v := dValue{elem: one(t, tt, 1).v}
		for _, df := range all(decode(t, one(t, tt, 2).b), 1) {
			dfs := decode(t, df.b)
			if p := all(dfs, 2); len(p) == 1 {
				v.dims = append(v.dims, string(p[0].b))
			} else {
				v.dims = append(v.dims, jsonInt(one(t, dfs, 1).v))
			}
		}
		m.values[name] = v
		return name
	}
	for _, f := range all(g, 11) {
		m.inputs = append(m.inputs, value(f))
	}
	for _, f := range all(g, 12) {
		m.outputs = append(m.outputs, value(f))
	}
	return m
}

func jsonInt(v uint64) string { b, _ := json.Marshal(v); return string(b) }

func (m dModel) ops() []string {
	var out []string
	for _, n := range m.nodes {
		out = append(out, n.op)
	}
	return out
}

// checkTopological checks what onnx.proto asks of a graph: nodes sorted
// topologically (each input is a graph input, an initializer or an
// earlier node's output) and every value name defined once (static single
// assignment, as the ONNX IR document requires; from memory). It also
// checks every initializer is used.
func checkTopological(t *testing.T, m dModel) {
	t.Helper()
	defined := map[string]bool{}
	for _, in := range m.inputs {
		defined[in] = true
	}
	used := map[string]bool{}
	for name := range m.inits {
		if defined[name] {
			t.Errorf("initializer %q is also a graph input", name)
		}
		defined[name] = true
	}
	for i, n := range m.nodes {
		for _, in := range n.in {
			if !defined[in] {
				t.Errorf("node %d (%s) reads %q before anything defines it", i, n.op, in)
			}
			used[in] = true
		}
		for _, out := range n.out {
			if defined[out] {
				t.Errorf("node %d (%s) redefines %q", i, n.op, out)
			}
			defined[out] = true
		}
	}
	for _, out := range m.outputs {
		if !defined[out] {
			t.Errorf("graph output %q is never computed", out)
		}
	}
	for name := range m.inits {
		if !used[name] {
			t.Errorf("initializer %q is never used", name)
		}
	}
}

// TestStructure decodes an export with a folded pipeline and checks its
// parts against the network and pipeline it came from.
func TestStructure(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	tb := mixedTable(rng, 40, false)
	p := fitPipeline(t, tb, prep.Options{UnitNorm: true})
	n := build[float32](t, p.Width(), 7, func(b *net.Builder[float32]) {
		b.ConstantFeature("one").Dense("h1", 6).ReLU("r1").Readout("out", 3)
	})
	classes := []string{"calm", "gusty", "stormy"}
	b, err := Marshal(&modelfile.Model[float32]{Network: n, Pipeline: p, Classes: classes}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	m := decodeModel(t, b)
	if m.ir != 8 || len(m.opsets) != 1 || m.opsets[""] != 17 || m.producer != "rhomb" {
		t.Errorf("ir %d, opsets %v, producer %q; want 8, {\"\": 17}, rhomb", m.ir, m.opsets, m.producer)
	}
	checkTopological(t, m)
	wantOps := []string{
		"Sub", "Div", // standardize the numeric columns
		"Concat", "Gather", // join with the one-hot blocks, restore the column order
		"LpNormalization",
		"Shape", "Concat", "Expand", "Concat", // the constant feature
		"MatMul", "Relu", "MatMul",
		"ArgMax",
	}
	if got := m.ops(); !slices.Equal(got, wantOps) {
		t.Errorf("ops %v\nwant %v", got, wantOps)
	}
	// Inputs, outputs and their types: FLOAT = 1, INT64 = 7 (onnx.proto
	// TensorProto.DataType).
	wantValues := map[string]dValue{
		"numeric": {1, []string{"N", "3"}},
		"onehot":  {1, []string{"N", "5"}},
		"scores":  {1, []string{"N", "3"}},
		"class":   {7, []string{"N"}},
	}
	if !slices.Equal(m.inputs, []string{"numeric", "onehot"}) || !slices.Equal(m.outputs, []string{"scores", "class"}) {
		t.Errorf("inputs %v, outputs %v", m.inputs, m.outputs)
	}
	for name, want := range wantValues {
		if got := m.values[name]; got.elem != want.elem || !slices.Equal(got.dims, want.dims) {
			t.Errorf("%s: type %d dims %v, want %d %v", name, got.elem, got.dims, want.elem, want.dims)
		}
	}
	// The standardization constants are the pipeline's, rounded to float32.
	mean, scale := m.inits["pre/mean"].floats(), m.inits["pre/scale"].floats()
	for j, col := range []int{0, 2, 4} { // mass, temp, ratio
		s := p.Encodings[col]
		if mean[j] != float32(s.Mean) || scale[j] != float32(s.Scale) {
			t.Errorf("column %q: mean %v scale %v, want float32 of %v, %v", s.Name, mean[j], scale[j], s.Mean, s.Scale)
		}
	}
	// Gather puts the joined columns (numeric first, then one-hot) back in
	// the pipeline's feature order.
	names := p.FeatureNames()
	joined := []string{"mass", "temp", "ratio"}
	for _, f := range names {
		if !slices.Contains(joined[:3], f) {
			joined = append(joined, f)
		}
	}
	var reordered []string
	for _, i := range m.inits["pre/order"].int64s() {
		reordered = append(reordered, joined[i])
	}
	if !slices.Equal(reordered, names) {
		t.Errorf("Gather gives features %v, want %v", reordered, names)
	}
	if g := m.nodes[3]; g.attrs["axis"] != 1 {
		t.Errorf("Gather axis %d, want 1", g.attrs["axis"])
	}
	if l := m.nodes[4]; l.attrs["axis"] != 1 || l.attrs["p"] != 2 {
		t.Errorf("LpNormalization attributes %v, want axis 1, p 2", l.attrs)
	}
	// Dense layers: MatMul(x, Wᵀ) with Wᵀ in×out, since y = x·Wᵀ.
	for _, d := range n.Dense() {
		wt := m.inits["node/"+escape(d.Name())+"/Wt"]
		if d.Readout() {
			wt = m.inits["scores/Wt"]
		}
		if !slices.Equal(wt.dims, []int64{int64(d.In()), int64(d.Out())}) || wt.dtype != 1 {
			t.Fatalf("%s: Wᵀ dims %v type %d, want [%d %d] FLOAT", d.Name(), wt.dims, wt.dtype, d.In(), d.Out())
		}
		v := wt.floats()
		for r := range d.Out() {
			for c := range d.In() {
				if v[c*d.Out()+r] != d.W.Value[r*d.In()+c] {
					t.Fatalf("%s: Wᵀ[%d,%d] = %v, want W[%d,%d] = %v", d.Name(), c, r, v[c*d.Out()+r], r, c, d.W.Value[r*d.In()+c])
				}
			}
		}
	}
	var gotClasses, gotFeatures []string
	if json.Unmarshal([]byte(m.meta["rhomb.classes"]), &gotClasses) != nil || !slices.Equal(gotClasses, classes) {
		t.Errorf("metadata classes %q", m.meta["rhomb.classes"])
	}
	if json.Unmarshal([]byte(m.meta["rhomb.features"]), &gotFeatures) != nil || !slices.Equal(gotFeatures, names) {
		t.Errorf("metadata features %q", m.meta["rhomb.features"])
	}
	// Deterministic: the same model gives the same bytes.
	again, _ := Marshal(&modelfile.Model[float32]{Network: n, Pipeline: p, Classes: classes}, Options{})
	if !bytes.Equal(again, b) {
		t.Error("two exports of one model differ")
	}
}

// TestStructureVariants checks the ops written for the other settings.
func TestStructureVariants(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	tb := mixedTable(rng, 40, true)
	p := fitPipeline(t, tb, prep.Options{Impute: true})
	for _, c := range []struct {
		name  string
		build func(*net.Builder[float64])
		o     Options
		pipe  *prep.Pipeline
		ops   []string
	}{
		{"impute-binary", func(b *net.Builder[float64]) { b.Dense("h", 4).SmoothReLU("s", 3).Readout("out", 1) }, Options{}, p,
			[]string{"IsNaN", "Where", "Sub", "Div", "Concat", "Gather", "MatMul", "Mul", "Softplus", "Div", "MatMul", "Greater", "Cast", "Reshape"}},
		{"feature-input-scores", func(b *net.Builder[float64]) { b.Dense("h", 4).SmoothReLU("s", 1).Readout("out", 2) }, Options{FeatureInput: true, ScoresOnly: true}, p,
			[]string{"MatMul", "Softplus", "MatMul"}},
		// Degree 3: t, 2t, then b_2 = c_2 + 2t·c_3 (Mul, Add), b_1 = c_1 +
		// 2t·b_2 − c_3 (Mul, Add, Sub), p = c_0 + t·b_1 − b_2 (Mul, Add, Sub).
		{"batch-norm", func(b *net.Builder[float64]) {
			b.Dense("h", 4).BatchNorm("n", true, false).ReLU("r").Readout("out", 2)
		}, Options{FeatureInput: true, ScoresOnly: true}, p,
			[]string{"MatMul", "BatchNormalization", "Relu", "MatMul"}},
		{"poly", func(b *net.Builder[float64]) { b.PolyReLU("p", 3, -2, 2, net.FitInterpolation).Readout("out", 2) }, Options{ScoresOnly: true}, nil,
			[]string{"Sub", "Mul", "Mul", "Mul", "Add", "Mul", "Add", "Sub", "Mul", "Add", "Sub", "MatMul"}},
	} {
		t.Run(c.name, func(t *testing.T) {
			n := build[float64](t, p.Width(), 1, c.build)
			b, err := Marshal(&modelfile.Model[float64]{Network: n, Pipeline: c.pipe}, c.o)
			if err != nil {
				t.Fatal(err)
			}
			m := decodeModel(t, b)
			checkTopological(t, m)
			if got := m.ops(); !slices.Equal(got, c.ops) {
				t.Errorf("ops %v\nwant %v", got, c.ops)
			}
		})
	}
}

// TestBatchNormExport checks the BatchNormalization node of an export
// against the network's batch-norm node: its five inputs in the order of
// the operator's definition (X, scale, B, input_mean, input_var; ONNX
// Operators.md, BatchNormalization; from memory), initializers of one
// value per unit — γ or ones, β or zeros, the running mean and variance,
// each the float32 rounding of the node's — and epsilon as a FLOAT
// attribute, with no training_mode attribute (its default 0 is inference).
func TestBatchNormExport(t *testing.T) {
	for _, st := range [][2]bool{{true, false}, {false, true}} {
		n := build[float64](t, 3, 2, func(b *net.Builder[float64]) {
			b.Dense("h", 4).BatchNorm("n", st[0], st[1]).ReLU("r").Readout("out", 2)
		})
		bn := n.Node("n").(*net.BatchNorm[float64])
		for j := range 4 {
			bn.Mean.Value[j], bn.Var.Value[j] = 0.1*float64(j)-0.15, 0.7+0.3*float64(j)
			if bn.Scale != nil {
				bn.Scale.Value[j] = 1.1 - 0.2*float64(j)
			}
			if bn.Shift != nil {
				bn.Shift.Value[j] = 0.05 * float64(j)
			}
		}
		b, err := Marshal(&modelfile.Model[float64]{Network: n}, Options{ScoresOnly: true})
		if err != nil {
			t.Fatal(err)
		}
		m := decodeModel(t, b)
		checkTopological(t, m)
		nd := m.nodes[1]
		if nd.op != "BatchNormalization" || len(nd.in) != 5 || nd.in[0] != "node/h" || nd.out[0] != "node/n" {
			t.Fatalf("node %+v", nd)
		}
		if len(nd.attrs) != 0 || len(nd.floats) != 1 || nd.floats["epsilon"] != float32(1e-5) {
			t.Errorf("attributes %v %v, want only epsilon = %v", nd.attrs, nd.floats, float32(1e-5))
		}
		want := [4][]float64{{1, 1, 1, 1}, {0, 0, 0, 0}, bn.Mean.Value, bn.Var.Value}
		if bn.Scale != nil {
			want[0] = bn.Scale.Value
		}
		if bn.Shift != nil {
			want[1] = bn.Shift.Value
		}
		for k, in := range nd.in[1:] {
			init := m.inits[in]
			got := init.floats()
			if !slices.Equal(init.dims, []int64{4}) || init.dtype != 1 || len(got) != 4 {
				t.Fatalf("input %d (%s): dims %v type %d", k+1, in, init.dims, init.dtype)
			}
			for j, v := range want[k] {
				if got[j] != float32(v) {
					t.Errorf("input %d (%s) unit %d: %v, want float32 of %v", k+1, in, j, got[j], v)
				}
			}
		}
	}
}

// custom is a node of the caller's own, which has no ONNX form.
type custom struct{ net.Node[float32] }

func (custom) Name() string                  { return "mine" }
func (custom) Kind() string                  { return "my-activation" }
func (custom) Connect(in int) (int, error)   { return in, nil }
func (custom) Params() []*net.Param[float32] { return nil }
func (custom) Forward(x, y []float32, rows int) {
	copy(y, x)
}

func TestErrors(t *testing.T) {
	var e *Error
	// A custom node: ErrUnsupported, naming the node.
	n, err := net.NewBuilder[float32](3).Dense("h", 4).Node(custom{}).Readout("out", 2).Build()
	if err != nil {
		t.Fatal(err)
	}
	_, err = Marshal(&modelfile.Model[float32]{Network: n}, Options{})
	if !errors.As(err, &e) || !errors.Is(err, ErrUnsupported) || e.Node != "mine" || e.Index != 1 || e.Kind != "my-activation" {
		t.Errorf("custom node: %v", err)
	}
	// float64 weights beyond float32's range (max ≈ 3.4e38, IEEE 754).
	n64 := build[float64](t, 3, 1, func(b *net.Builder[float64]) { b.Dense("h", 2).ReLU("r").Readout("out", 2) })
	n64.Dense()[1].W.Value[3] = 1e39
	_, err = Marshal(&modelfile.Model[float64]{Network: n64}, Options{})
	if !errors.As(err, &e) || !errors.Is(err, ErrUnsupported) || e.Node != "out" {
		t.Errorf("weight 1e39: %v", err)
	}
	n64.Dense()[1].W.Value[3] = math.NaN()
	if _, err = Marshal(&modelfile.Model[float64]{Network: n64}, Options{}); !errors.Is(err, ErrUnsupported) {
		t.Errorf("NaN weight: %v", err)
	}
	// A sharpness float32 cannot hold.
	ns := build[float64](t, 3, 1, func(b *net.Builder[float64]) { b.Dense("h", 2).SmoothReLU("s", 1e39).Readout("out", 2) })
	if _, err = Marshal(&modelfile.Model[float64]{Network: ns}, Options{}); !errors.As(err, &e) || e.Node != "s" || !errors.Is(err, ErrUnsupported) {
		t.Errorf("sharpness 1e39: %v", err)
	}
	// A pipeline that does not match the network's input.
	rng := rand.New(rand.NewPCG(1, 1))
	p := fitPipeline(t, mixedTable(rng, 20, false), prep.Options{})
	n3 := build[float32](t, 3, 1, func(b *net.Builder[float32]) { b.Readout("out", 2) })
	if _, err = Marshal(&modelfile.Model[float32]{Network: n3, Pipeline: p}, Options{}); !errors.As(err, &e) || e.Kind != "pipeline" {
		t.Errorf("pipeline of width %d for 3 inputs: %v", p.Width(), err)
	}
	// Node names that would collide if taken as they are.
	nc := build[float32](t, 3, 1, func(b *net.Builder[float32]) { b.Dense("a", 2).Dense("a/Wt", 2).Readout("out", 2) })
	if _, err = Marshal(&modelfile.Model[float32]{Network: nc}, Options{}); err != nil {
		t.Errorf("nodes a and a/Wt: %v", err)
	}
	if _, err = Marshal[float32](nil, Options{}); !errors.As(err, &e) || e.Kind != "model" {
		t.Errorf("nil model: %v", err)
	}
}

// TestMismatchDetects makes sure the runtime comparison can fail: rhomb's
// own answers pass, and a change of 1e-4 relative in one score, or a
// flipped class on a row far from a tie, is reported.
func TestMismatchDetects(t *testing.T) {
	for _, c := range runtimeCases(t) {
		got := func() map[string]result {
			s := result{Type: "float32", Dims: []int{c.rows, c.outputs}, Data: slices.Clone(c.want)}
			k := result{Type: "int64", Dims: []int{c.rows}}
			for _, v := range c.class {
				k.Data = append(k.Data, float64(v))
			}
			r := map[string]result{OutputScores: s}
			if !c.scores {
				r[OutputClass] = k
			}
			return r
		}
		if bad, _ := c.mismatch(got()); bad != "" {
			t.Errorf("%s: rhomb's own answers fail: %s", c.name, bad)
		}
		// The largest score moved by 1e-4 relative, ten times relTol, plus
		// its bound B: just beyond the tolerance.
		big := 0
		for i, w := range c.want {
			if math.Abs(w) > math.Abs(c.want[big]) {
				big = i
			}
		}
		g := got()
		g[OutputScores].Data[big] *= 1 + 1e-4 + c.bound[big]/math.Abs(c.want[big])
		if bad, _ := c.mismatch(g); bad == "" {
			t.Errorf("%s: a score off by more than its tolerance passed", c.name)
		}
		if c.scores {
			continue
		}
		scores := got()[OutputScores].Data
		tol := make([]float64, len(scores))
		for i, w := range c.want {
			tol[i] = relTol*math.Abs(w) + c.bound[i]
		}
		for r := range c.rows {
			if c.nearTie(r, tol) {
				continue
			}
			g := got()
			g[OutputClass].Data[r] = float64((c.class[r] + 1) % max(c.outputs, 2))
			if bad, _ := c.mismatch(g); bad == "" {
				t.Errorf("%s: a wrong class on row %d passed", c.name, r)
			}
			break
		}
	}
}

// TestLevelCapExport: a pipeline with a capped column exports with the
// other feature in the onehot input, and the graph's Concat and Gather
// put every input value where prep puts its feature. Without
// standardizing, prep's numeric feature is (x − 0)/1 = x, so for values
// exact in float32 the graph's features equal prep's bit for bit; the
// check applies Concat (axis 1) and Gather (axis 1: output column j is
// input column indices[j]; ONNX Operators.md) to the inputs as a caller
// builds them from prep's blocks, for rows of kept, pooled and never-seen
// categories. onnxruntime runs the same kind of model in TestRuntime
// ("relu-levelcap-f32").
func TestLevelCapExport(t *testing.T) {
	cols := []prep.Column{
		{Name: "a", Kind: prep.Numeric, Num: []float64{0.5, -2, 3, 4.25, 1, 7, -0.75, 2}},
		// n1 ×3, n2 ×2, then n3..n5 once each: the cap of 2 keeps n1, n2.
		{Name: "lot", Kind: prep.Categorical, Cat: []string{"n1", "n2", "n1", "n3", "n2", "n4", "n1", "n5"}},
		{Name: "b", Kind: prep.Numeric, Num: []float64{10, 20, 30, 40, 50, 60, 70, 80}},
		{Name: "shift", Kind: prep.Categorical, Cat: []string{"day", "night", "day", "night", "day", "night", "day", "night"}},
	}
	p := fitPipeline(t, table{cols: cols, rows: 8}, prep.Options{LevelCap: 2, NoStandardize: true})
	if s := p.Encodings[1]; !slices.Equal(s.Categories, []string{"n1", "n2"}) || s.OtherLevels != 3 {
		t.Fatalf("test premise: lot step %+v, want kept [n1 n2] and 3 others", s)
	}
	names := p.FeatureNames()
	if want := []string{"a", "lot=n1", "lot=n2", "lot= (other)", "b", "shift=day", "shift=night"}; !slices.Equal(names, want) {
		t.Fatalf("features %q, want %q", names, want)
	}
	n := build[float32](t, p.Width(), 1, func(b *net.Builder[float32]) { b.Readout("out", 2) })
	b, err := Marshal(&modelfile.Model[float32]{Network: n, Pipeline: p}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	m := decodeModel(t, b)
	checkTopological(t, m)
	if got := m.ops(); !slices.Equal(got, []string{"Concat", "Gather", "MatMul", "ArgMax"}) {
		t.Errorf("ops %v", got)
	}
	if got := m.values[InputOneHot].dims; !slices.Equal(got, []string{"N", "5"}) {
		t.Errorf("onehot dims %v, want [N 5]: lot's 2 + other + shift's 2", got)
	}
	var meta []string
	if json.Unmarshal([]byte(m.meta["rhomb.features"]), &meta) != nil || !slices.Equal(meta, names) {
		t.Errorf("metadata features %q, want %q", m.meta["rhomb.features"], names)
	}
	perm := m.inits["pre/order"].int64s()
	if len(perm) != p.Width() {
		t.Fatalf("Gather indices %v for %d features", perm, p.Width())
	}
	// Rows 0, 1: kept; 3, 5, 7: pooled; then the same table with lot
	// values never seen in training.
	unseen := slices.Clone(cols)
	unseen[1].Cat = []string{"m1", "m2", "m3", "m4", "m5", "m6", "m7", "m8"}
	for _, tb := range [][]prep.Column{cols, unseen} {
		for r := range 8 {
			want := make([]float64, p.Width())
			if err := p.ApplyColumns(tb, r, want); err != nil {
				t.Fatal(err)
			}
			// The inputs: numeric [a, b] raw, onehot prep's blocks of lot
			// and shift (features 1..3 and 5..6).
			joined := []float32{float32(tb[0].Num[r]), float32(tb[2].Num[r])}
			for _, f := range []int{1, 2, 3, 5, 6} {
				joined = append(joined, float32(want[f]))
			}
			for j, i := range perm {
				if got := float64(joined[i]); math.Float64bits(got) != math.Float64bits(want[j]) {
					t.Errorf("lot %q, row %d: graph feature %d (%s) = %v, prep %v", tb[1].Cat[r], r, j, names[j], got, want[j])
				}
			}
			if other := want[3]; (tb[1].Cat[r] == "n1" || tb[1].Cat[r] == "n2") == (other == 1) {
				t.Errorf("lot %q: other feature %v", tb[1].Cat[r], other)
			}
		}
	}
}

// TestThresholdInGraph: a two-class model whose file holds a decision
// threshold compares the score with that threshold (rounded to float32)
// in the class output, as rhomb's serving reader answers; without one the
// cut is 0.
func TestThresholdInGraph(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	tb := mixedTable(rng, 40, true)
	p := fitPipeline(t, tb, prep.Options{Impute: true})
	n := build[float64](t, p.Width(), 1, func(b *net.Builder[float64]) { b.Dense("h", 4).ReLU("r").Readout("out", 1) })
	for _, tc := range []struct {
		decision *schema.Decision
		want     float32
	}{{nil, 0}, {&schema.Decision{Threshold: ptr(-0.613758)}, float32(-0.613758)}} {
		b, err := Marshal(&modelfile.Model[float64]{Network: n, Pipeline: p, Decision: tc.decision}, Options{})
		if err != nil {
			t.Fatal(err)
		}
		m := decodeModel(t, b)
		got := m.inits["class/threshold"].floats()
		if len(got) != 1 || got[0] != tc.want {
			t.Errorf("decision %+v: the class output cuts at %v, want %v", tc.decision, got, tc.want)
		}
	}
}

func ptr(v float64) *float64 { return &v }
