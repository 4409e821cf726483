package modelfile_test

import (
	"context"
	"encoding/binary"
	"errors"
	"math"
	"testing"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net/classify"
	"github.com/rhomb/rhomb/net/schema"
	"github.com/rhomb/rhomb/normalize"
	"github.com/rhomb/rhomb/optim"
	"github.com/rhomb/rhomb/optim/modelfile"
)

// agreeSeeds are model files of every shape the writer makes: plain and
// normalized (per layer, per unit, global, skipping the readout), with
// batch normalization, float32 and float64, with and without a
// checkpoint.
func agreeSeeds(t testing.TB) [][]byte {
	var out [][]byte
	for _, o := range []*normalize.Options{nil, {}, {PerUnit: true}, {Scale: normalize.Global}, {SkipReadout: true, Hold: normalize.Projection}} {
		n := network[float64](t, 4)
		m := &modelfile.Model[float64]{Network: n, Classes: []string{"low", "mid", "high"}}
		if o != nil {
			w, err := normalize.Wrap(n, *o)
			if err != nil {
				t.Fatal(err)
			}
			m.Normalized = w
		}
		out = append(out, encode(t, m))
		m32, err := modelfile.Read[float32](out[len(out)-1], "seed")
		if err != nil {
			t.Fatal(err)
		}
		out = append(out, encode(t, m32))
	}
	// Batch normalization, with running statistics moved by training, in
	// both element types.
	bn := trained(t, bnNetwork[float64](t, 6))
	out = append(out, encode(t, &modelfile.Model[float64]{Network: bn}))
	bn32, err := modelfile.Read[float32](out[len(out)-1], "seed")
	if err != nil {
		t.Fatal(err)
	}
	out = append(out, encode(t, bn32))
	// A checkpoint: a few steps of training leave momentum buffers and a
	// batch order.
	n := network[float64](t, 5)
	w, _ := normalize.Wrap(n, normalize.Options{})
	set := &data.Set[float64]{Rows: 20, Features: 5, Outputs: 3, X: rows[float64](6, 20, n.In()), Y: make([]float64, 20*3)}
	for r := range 20 {
		set.Y[r*3+r%3] = 1
	}
	tr, err := optim.NewTrainer[float64](w, loss.Square[float64]{}, set, optim.Settings{LearningRate: 0.01, Momentum: 0.9, BatchSize: 5, Epochs: 1, Seed: 1})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := tr.Run(context.Background()); err != nil {
		t.Fatal(err)
	}
	st := tr.State()
	out = append(out, encode(t, &modelfile.Model[float64]{Network: n, Normalized: w, Checkpoint: &st, Kept: kept(w)}))
	// A checkpoint of a batch-normalized network that keeps its best
	// epoch: kept parameters and running statistics.
	nb := bnNetwork[float64](t, 7)
	tb, err := optim.NewTrainer[float64](nb, loss.Square[float64]{}, set, optim.Settings{LearningRate: 0.01, Momentum: 0.9, BatchSize: 5, Epochs: 1, Seed: 1})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := tb.Run(context.Background()); err != nil {
		t.Fatal(err)
	}
	stb := tb.State()
	var kb [][]float64
	for _, p := range nb.Params() {
		kb = append(kb, widen(p.Value))
	}
	for _, r := range nb.Running() {
		kb = append(kb, widen(r.Value))
	}
	out = append(out, encode(t, &modelfile.Model[float64]{Network: nb, Checkpoint: &stb, Kept: kb}))
	return out
}

func kept(w *normalize.Net[float64]) [][]float64 {
	var k [][]float64
	for _, p := range w.Params() {
		k = append(k, append([]float64(nil), p.Value...))
	}
	return k
}

// withHeader replaces the header of model file b by h, keeping its tensor
// data, and repairs the padding and the checksum, so that the checks
// behind them run.
func withHeader(b, h []byte) []byte {
	hl := int64(binary.LittleEndian.Uint32(b[12:]))
	start := (schema.PrefixLen + hl + 7) / 8 * 8
	return schema.Assemble(h, b[start:len(b)-schema.SumLen])
}

func header(b []byte) []byte {
	hl := binary.LittleEndian.Uint32(b[12:])
	return b[schema.PrefixLen : schema.PrefixLen+hl]
}

// agree reads b with the training library's reader (as float64 and as
// float32) and with the serving reader, and fails unless all three accept
// it or all three refuse it, with the same cause; when they accept it,
// the serving reader's scores must be the training network's, bit for
// bit, in the file's own element type.
func agree(t *testing.T, b []byte) {
	m64, err64 := modelfile.Read[float64](b, "f")
	_, err32 := modelfile.Read[float32](b, "f")
	c, errc := classify.Read(b, "f")
	if (err64 == nil) != (errc == nil) || (err32 == nil) != (errc == nil) {
		t.Fatalf("the readers disagree: training (float64) %v; training (float32) %v; serving %v", err64, err32, errc)
	}
	if errc != nil {
		var fe *schema.Error
		if !errors.As(err64, &fe) || !errors.As(errc, &fe) {
			t.Fatalf("not a *schema.Error: training %T %v, serving %T %v", err64, err64, errc, errc)
		}
		if err64.Error() != errc.Error() {
			t.Fatalf("the readers refuse for different reasons: training %v; serving %v", err64, errc)
		}
		return
	}
	x := rows[float64](9, 4, c.Features())
	dt := c.Info().DType
	var want []float64
	if dt == schema.Float32 {
		m32, _ := modelfile.Read[float32](b, "f")
		x32 := make([]float32, len(x))
		for i, v := range x {
			x32[i] = float32(v)
		}
		for _, v := range m32.Network.Forward(x32, 4) {
			want = append(want, float64(v))
		}
	} else {
		want = m64.Network.Forward(x, 4)
	}
	got := make([]classify.Answer, 4)
	if err := c.ClassifyVectors(nil, x, 4, got); err != nil {
		if errors.Is(err, classify.ErrOutput) {
			return // a mutated polynomial can overflow; both compute the same
		}
		t.Fatal(err)
	}
	o := c.Outputs()
	for r := range 4 {
		for j := range o {
			if g, w := got[r].Scores[j], want[r*o+j]; math.Float64bits(g) != math.Float64bits(w) {
				t.Fatalf("%s model, row %d output %d: serving %v, training %v", dt, r, j, g, w)
			}
		}
	}
}

// TestReadersAgree: both readers accept every file the writer makes and
// compute the same bits from it.
func TestReadersAgree(t *testing.T) {
	for _, b := range agreeSeeds(t) {
		agree(t, b)
	}
}

// FuzzReadersAgree mutates the header of real model files, repairs the
// checksum so that every check behind it runs, and requires the training
// and serving readers to accept exactly the same files (and, when they
// do, to give the same scores).
func FuzzReadersAgree(f *testing.F) {
	for _, b := range agreeSeeds(f) {
		f.Add(b, header(b))
	}
	f.Fuzz(func(t *testing.T, file, h []byte) {
		if len(file) < schema.PrefixLen+schema.SumLen || int64(binary.LittleEndian.Uint32(file[12:])) > int64(len(file)) {
			return
		}
		hl := int64(binary.LittleEndian.Uint32(file[12:]))
		if (schema.PrefixLen+hl+7)/8*8 > int64(len(file)-schema.SumLen) {
			return
		}
		agree(t, withHeader(file, h))
	})
}
