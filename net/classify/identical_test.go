package classify_test

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"path/filepath"
	"runtime"
	"testing"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/data/demo"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/net/classify"
	"github.com/rhomb/rhomb/normalize"
	"github.com/rhomb/rhomb/optim"
	"github.com/rhomb/rhomb/optim/modelfile"
)

// The reference for every test in this file is the training library's own
// forward pass (net.Network.Forward, and normalize.Net.Forward for wrapped
// models) on the model that was saved: classify must reproduce it bit for
// bit, so the comparisons are ==, with no tolerance. The training data are
// the invented demo readings (data/demo): the property holds for any data.

// bitsChecked skips a comparison that only holds where the Go compiler
// does not fuse multiply-adds: the training library's polynomial and
// smoothed nodes are written in plain Go, which the compiler fuses on
// arm64 and not on amd64, while classify rounds every product (so that its
// own bits are the same on every architecture). Dense layers and ReLU give
// the same bits everywhere: the matrix product rounds by a fixed FMA rule.
func bitsChecked(t *testing.T, act string) {
	t.Helper()
	if act != "relu" && runtime.GOARCH != "amd64" {
		t.Skipf("on %s the training library's %s node may fuse multiply-adds; its bits are compared on amd64", runtime.GOARCH, act)
	}
}

type kindCase struct {
	act      string // relu, smooth, poly
	norm     string // none, per-layer, global, projection, per-unit, skip-readout
	constant bool
	binary   bool
}

func (k kindCase) String() string {
	out := "multi"
	if k.binary {
		out = "binary"
	}
	return fmt.Sprintf("act=%s/norm=%s/one=%v/%s", k.act, k.norm, k.constant, out)
}

func demoSplit(t testing.TB) *demo.Split[float64] {
	t.Helper()
	s, err := demo.Pumps[float64](300)
	if err != nil {
		t.Fatal(err)
	}
	return s
}

// binarySet relabels a multi-class set as healthy (−1) against the rest
// (+1), the ±1 encoding of a one-output model.
func binarySet(s *data.Set[float64]) *data.Set[float64] {
	b := &data.Set[float64]{X: s.X, Rows: s.Rows, Features: s.Features, Outputs: 1, Classes: []string{"healthy", "faulty"}, Y: make([]float64, s.Rows)}
	for r := range s.Rows {
		b.Y[r] = 1
		if s.Class(r) == 0 {
			b.Y[r] = -1
		}
	}
	return b
}

// build makes, trains briefly and returns a model of the given kind.
func build(t testing.TB, k kindCase, set *data.Set[float64]) *modelfile.Model[float64] {
	t.Helper()
	b := net.NewBuilder[float64](set.Features)
	if k.constant {
		b.ConstantFeature("one")
	}
	for i, w := range []int{9, 7} {
		name := fmt.Sprintf("hidden%d", i+1)
		b.Dense(name, w)
		switch k.act {
		case "relu":
			b.ReLU("act" + name)
		case "smooth":
			b.SmoothReLU("act"+name, 3)
		case "poly":
			b.PolyReLU("act"+name, 6, -4, 4, net.FitInterpolation)
		case "poly-ls":
			b.PolyReLU("act"+name, 6, -4, 4, net.FitLeastSquares)
		}
	}
	b.Readout("readout", set.Outputs)
	n, err := b.Build()
	if err != nil {
		t.Fatal(err)
	}
	if err := n.Init(net.InitSettings{Scheme: net.HeNormal, Rho0: 2, Seed: 7}); err != nil {
		t.Fatal(err)
	}
	m := &modelfile.Model[float64]{Network: n, Classes: set.Classes}
	var trainable optim.Model[float64] = n
	if k.norm != "none" {
		var o normalize.Options
		switch k.norm {
		case "global":
			o.Scale = normalize.Global
		case "projection":
			o.Hold = normalize.Projection
		case "per-unit":
			o.PerUnit = true
		case "skip-readout":
			o.SkipReadout = true
		}
		w, err := normalize.Wrap(n, o)
		if err != nil {
			t.Fatal(err)
		}
		m.Normalized, trainable = w, w
	}
	tr, err := optim.NewTrainer[float64](trainable, loss.Square[float64]{}, set, optim.Settings{LearningRate: 0.05, BatchSize: 50, WeightDecay: 1e-3, Epochs: 2, Seed: 3})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := tr.Run(context.Background()); err != nil {
		t.Fatal(err)
	}
	if m.Normalized != nil {
		m.Normalized.Sync()
	}
	return m
}

func saveLoad(t *testing.T, m *modelfile.Model[float64]) *classify.Model {
	t.Helper()
	path := filepath.Join(t.TempDir(), "m.model")
	if err := modelfile.Save(path, m); err != nil {
		t.Fatal(err)
	}
	c, err := classify.Load(path)
	if err != nil {
		t.Fatal(err)
	}
	return c
}

// sameBits compares classify's scores on every row of x with want
// (rows×outputs) with ==, and Class with data.ClassOf.
func sameBits(t *testing.T, c *classify.Model, x []float64, rows int, want []float64) {
	t.Helper()
	o := c.Outputs()
	answers := make([]classify.Answer, rows)
	if err := c.ClassifyVectors(nil, x, rows, answers); err != nil {
		t.Fatal(err)
	}
	w := c.NewWork()
	for r := range rows {
		ref := want[r*o : (r+1)*o]
		one, err := c.ClassifyVector(w, x[r*c.Features():(r+1)*c.Features()])
		if err != nil {
			t.Fatal(err)
		}
		for j := range o {
			if math.Float64bits(answers[r].Scores[j]) != math.Float64bits(ref[j]) || math.Float64bits(one.Scores[j]) != math.Float64bits(ref[j]) {
				t.Fatalf("row %d output %d: classify gives %v (batch) and %v (single), training %v (bits %#x, %#x, %#x)",
					r, j, answers[r].Scores[j], one.Scores[j], ref[j], math.Float64bits(answers[r].Scores[j]), math.Float64bits(one.Scores[j]), math.Float64bits(ref[j]))
			}
		}
		if cl := data.ClassOf(ref); answers[r].Class != cl || one.Class != cl {
			t.Fatalf("row %d: class %d (batch), %d (single), training's rule gives %d", r, answers[r].Class, one.Class, cl)
		}
	}
}

// TestSameBitsEveryKind trains every kind of model the trainer makes —
// each activation, no normalization and each normalization mode, with and
// without the constant feature, ±1 binary and multi-class — saves it with
// modelfile, loads it with classify and compares scores bit for bit with
// the training forward pass on the training and test rows.
func TestSameBitsEveryKind(t *testing.T) {
	split := demoSplit(t)
	sets := map[bool]*data.Set[float64]{false: split.Train, true: binarySet(split.Train)}
	x := append(append([]float64(nil), split.Train.X...), split.Test.X...)
	rows := split.Train.Rows + split.Test.Rows
	for _, act := range []string{"relu", "smooth", "poly"} {
		for _, norm := range []string{"none", "per-layer", "global", "projection", "per-unit", "skip-readout"} {
			for _, constant := range []bool{false, true} {
				for _, binary := range []bool{false, true} {
					k := kindCase{act, norm, constant, binary}
					t.Run(k.String(), func(t *testing.T) {
						bitsChecked(t, act)
						m := build(t, k, sets[binary])
						c := saveLoad(t, m)
						want := append([]float64(nil), m.Network.Forward(x, rows)...)
						sameBits(t, c, x, rows, want)
						if m.Normalized != nil {
							// The wrapper's own forward pass writes ρ·V into W
							// first; it must agree too.
							sameBits(t, c, x, rows, m.Normalized.Forward(x, rows))
						}
					})
				}
			}
		}
	}
}

// TestSameBitsWideLayers checks the rounding rule where the training
// library's matrix product cuts its work into tiles spread over goroutines
// (many rows, layers wider than a tile), on tiny layers, and on an inner
// size of 257, one more than its 256-step blocks, with random weights and
// inputs. The reference is
// again the training forward pass.
func TestSameBitsWideLayers(t *testing.T) {
	for _, shape := range [][]int{{37, 130, 67, 3}, {5, 1, 4}, {2, 6, 1}, {200, 257, 10}} {
		t.Run(fmt.Sprint(shape), func(t *testing.T) {
			b := net.NewBuilder[float64](shape[0])
			for i, w := range shape[1 : len(shape)-1] {
				b.Dense(fmt.Sprint("h", i), w).ReLU(fmt.Sprint("r", i))
			}
			n, err := b.Readout("out", shape[len(shape)-1]).Build()
			if err != nil {
				t.Fatal(err)
			}
			if err := n.Init(net.InitSettings{Seed: uint64(len(shape))}); err != nil {
				t.Fatal(err)
			}
			c := saveLoad(t, &modelfile.Model[float64]{Network: n})
			const rows = 150
			rng := rand.New(rand.NewPCG(1, 2))
			x := make([]float64, rows*shape[0])
			for i := range x {
				x[i] = rng.NormFloat64()
			}
			sameBits(t, c, x, rows, n.Forward(x, rows))
		})
	}
}

// TestFieldsMatchTrainingEncoding classifies the demo file's raw cells
// through the model's pipeline (by position, by name and as a struct) and
// compares with the training forward pass on the rows encoded by
// data.Encode, the training path: same bits, so the pipeline is applied
// exactly as in training.
func TestFieldsMatchTrainingEncoding(t *testing.T) {
	split := demoSplit(t)
	m := build(t, kindCase{"relu", "global", true, false}, split.Train)
	m.Pipeline = split.Pipeline
	c := saveLoad(t, m)
	tab := split.Table
	all := make([]int, tab.Rows)
	for i := range all {
		all[i] = i
	}
	set, err := data.Encode[float64](tab, all, split.Pipeline, demo.Conditions)
	if err != nil {
		t.Fatal(err)
	}
	want := m.Network.Forward(set.X, set.Rows)
	bind, err := classify.Bind[reading](c)
	if err != nil {
		t.Fatal(err)
	}
	w := c.NewWork()
	cells := make([]string, len(tab.Columns))
	byName := map[string]string{}
	for r := range tab.Rows {
		var rd reading
		for i, col := range tab.Columns {
			cells[i] = cellText(col, r)
			delete(byName, col.Name)
			if !col.Missing[r] {
				byName[col.Name] = cells[i]
			}
		}
		rd.fill(tab.Columns, r)
		ref := want[r*4 : (r+1)*4]
		for form, classifyRow := range map[string]func() (classify.Answer, error){
			"fields": func() (classify.Answer, error) { return c.ClassifyFields(w, cells) },
			"map":    func() (classify.Answer, error) { return c.ClassifyMap(w, byName) },
			"struct": func() (classify.Answer, error) { return bind.Classify(w, &rd) },
		} {
			a, err := classifyRow()
			if err != nil {
				t.Fatalf("row %d (%s): %v", r, form, err)
			}
			for j := range ref {
				if math.Float64bits(a.Scores[j]) != math.Float64bits(ref[j]) {
					t.Fatalf("row %d (%s) output %d: classify %v, training %v", r, form, j, a.Scores[j], ref[j])
				}
			}
		}
	}
}

// cellText writes a table cell back as text: the shortest decimal that
// parses to the same float64 (strconv 'g', -1), or "NA" when missing.
func cellText(c data.Column, r int) string {
	if c.Missing[r] {
		return "NA"
	}
	if c.Kind == data.Kind(1) { // prep.Numeric
		return fmt.Sprint(c.Num[r])
	}
	return c.Cat[r]
}

// reading is the demo file's row as a Go struct, for Bind.
type reading struct {
	Site    *string  `classify:"site"`
	RMS     *float64 `classify:"vib_rms_mm_s"`
	Kurt    float64  `classify:"vib_kurtosis"` // NaN when missing
	Crest   *float64 `classify:"crest_factor"`
	Band1x  *float64 `classify:"band_1x_ratio"`
	BandHF  *float64 `classify:"band_hf_ratio"`
	Temp    *float64 `classify:"temp_rise_c"`
	Current *float64 `classify:"current_imbalance_pct"`
	Suction *float64 `classify:"suction_kpa"`
	Note    string   // no such input: ignored, since it is not tagged
}

func (rd *reading) fill(cols []data.Column, r int) {
	num := func(name string) *float64 {
		for _, c := range cols {
			if c.Name == name && !c.Missing[r] {
				v := c.Num[r]
				return &v
			}
		}
		return nil
	}
	for _, c := range cols {
		if c.Name == "site" && !c.Missing[r] {
			s := c.Cat[r]
			rd.Site = &s
		}
	}
	rd.RMS, rd.Crest, rd.Band1x, rd.BandHF = num("vib_rms_mm_s"), num("crest_factor"), num("band_1x_ratio"), num("band_hf_ratio")
	rd.Temp, rd.Current, rd.Suction = num("temp_rise_c"), num("current_imbalance_pct"), num("suction_kpa")
	rd.Kurt = math.NaN()
	if k := num("vib_kurtosis"); k != nil {
		rd.Kurt = *k
	}
}
