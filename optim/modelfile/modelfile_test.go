package modelfile_test

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/binary"
	"encoding/json"
	"errors"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"strings"
	"testing"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/normalize"
	"github.com/rhomb/rhomb/optim"
	"github.com/rhomb/rhomb/optim/modelfile"
)

func network[T net.Float](t testing.TB, seed uint64) *net.Network[T] {
	n, err := net.NewBuilder[T](5).ConstantFeature("one").
		Dense("h1", 7).ReLU("r1").
		Dense("h2", 6).PolyReLU("p2", 4, -3, 3, net.FitLeastSquares).
		Readout("out", 3).Build()
	if err != nil {
		t.Fatal(err)
	}
	if err := n.Init(net.InitSettings{Seed: seed, Rho0: 1.5}); err != nil {
		t.Fatal(err)
	}
	return n
}

func rows[T net.Float](seed uint64, n, width int) []T {
	rng := rand.New(rand.NewPCG(seed, seed))
	x := make([]T, n*width)
	for i := range x {
		x[i] = T(rng.NormFloat64())
	}
	return x
}

func sameOutputs[T net.Float](t *testing.T, a, b *net.Network[T]) {
	t.Helper()
	x := rows[T](3, 6, a.In())
	fa := append([]T(nil), a.Forward(x, 6)...)
	fb := b.Forward(x, 6)
	for i := range fa {
		if fa[i] != fb[i] {
			t.Fatalf("output %d: %v after the round trip, %v before", i, fb[i], fa[i])
		}
	}
}

func encode[T net.Float](t testing.TB, m *modelfile.Model[T]) []byte {
	var b bytes.Buffer
	if err := modelfile.Write(&b, m); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

func TestRoundTripPlain(t *testing.T) {
	n := network[float32](t, 1)
	m := &modelfile.Model[float32]{Network: n, Classes: []string{"a", "b", "c"}, Label: "kind", Loss: "square",
		Training: json.RawMessage(`{"epochs":3}`), Metrics: map[string]any{"accuracy": 0.75}}
	got, err := modelfile.Read[float32](encode(t, m), "mem")
	if err != nil {
		t.Fatal(err)
	}
	sameOutputs(t, n, got.Network)
	if got.Normalized != nil || got.Checkpoint != nil || got.Pipeline != nil {
		t.Error("a plain model came back with extra parts")
	}
	if strings.Join(got.Classes, ",") != "a,b,c" || got.Label != "kind" || got.Loss != "square" || string(got.Training) != `{"epochs":3}` || got.Metrics["accuracy"] != 0.75 {
		t.Errorf("metadata: %+v", got)
	}
	if !strings.HasPrefix(got.Library, "rhomb ") || got.Created.IsZero() {
		t.Errorf("library %q, created %v", got.Library, got.Created)
	}
	// float32 weights widen exactly into float64.
	wide, err := modelfile.Read[float64](encode(t, m), "mem")
	if err != nil {
		t.Fatal(err)
	}
	for i, p := range n.Params() {
		for j, v := range p.Value {
			if float64(v) != wide.Network.Params()[i].Value[j] {
				t.Fatalf("%s[%d]: %v widened to %v", p.Name, j, v, wide.Network.Params()[i].Value[j])
			}
		}
	}
}

func TestRoundTripNormalized(t *testing.T) {
	for _, o := range []normalize.Options{{}, {Scale: normalize.Global, Hold: normalize.Projection}, {PerUnit: true, SkipReadout: true, NoRetraction: true}, {Layers: []string{"h2"}}} {
		n := network[float64](t, 2)
		w, err := normalize.Wrap(n, o)
		if err != nil {
			t.Fatal(err)
		}
		// Move the parameters off their wrapped values so W must be synced.
		for _, p := range w.Params() {
			for j := range p.Value {
				p.Value[j] *= 1.01
			}
		}
		got, err := modelfile.Read[float64](encode(t, &modelfile.Model[float64]{Network: n, Normalized: w}), "mem")
		if err != nil {
			t.Fatal(err)
		}
		if got.Normalized == nil {
			t.Fatalf("%+v: no normalization read back", o)
		}
		if ro := got.Normalized.Options(); ro.Scale != o.Scale || ro.Hold != o.Hold || ro.PerUnit != o.PerUnit || ro.SkipReadout != o.SkipReadout || ro.NoRetraction != o.NoRetraction || len(ro.Layers) != len(o.Layers) {
			t.Errorf("options %+v read back as %+v", o, ro)
		}
		for i, p := range w.Params() {
			q := got.Normalized.Params()[i]
			if p.Name != q.Name {
				t.Fatalf("param %d: %s read back as %s", i, p.Name, q.Name)
			}
			for j := range p.Value {
				if math.Float64bits(p.Value[j]) != math.Float64bits(q.Value[j]) {
					t.Fatalf("%+v: %s[%d] %v read back as %v", o, p.Name, j, p.Value[j], q.Value[j])
				}
			}
		}
		sameOutputs(t, w.Base(), got.Network)
	}
}

// TestCheckpointResume: a run interrupted, saved to a checkpoint file,
// loaded and resumed ends with the same bits as an uninterrupted run.
func TestCheckpointResume(t *testing.T) {
	rng := rand.New(rand.NewPCG(4, 4))
	set := &data.Set[float32]{Rows: 70, Features: 5, Outputs: 3, X: rows[float32](5, 70, 5), Y: make([]float32, 70*3)}
	for r := range 70 {
		set.Y[r*3+rng.IntN(3)] = 1
	}
	s := optim.Settings{LearningRate: 0.05, BatchSize: 16, Momentum: 0.9, Temperature: 1e-6, WeightDecay: 1e-3, Epochs: 4, Seed: 8}
	mk := func() (*net.Network[float32], *normalize.Net[float32]) {
		n := network[float32](t, 5)
		w, err := normalize.Wrap(n, normalize.Options{Scale: normalize.Global})
		if err != nil {
			t.Fatal(err)
		}
		return n, w
	}
	run := func(w *normalize.Net[float32], s optim.Settings, st *optim.State) *optim.Trainer[float32] {
		tr, err := optim.NewTrainer[float32](w, loss.Square[float32]{}, set, s)
		if err != nil {
			t.Fatal(err)
		}
		if st != nil {
			if err := tr.Restore(*st); err != nil {
				t.Fatal(err)
			}
		}
		if _, err := tr.Run(context.Background()); err != nil {
			t.Fatal(err)
		}
		return tr
	}
	_, whole := mk()
	run(whole, s, nil)

	n, part := mk()
	stop := s
	stop.Hooks = &optim.Hooks{Step: func(i *optim.StepInfo) error {
		if i.Step == 7 {
			return optim.ErrStop
		}
		return nil
	}}
	tr := run(part, stop, nil)
	st := tr.State()
	path := filepath.Join(t.TempDir(), "run.checkpoint")
	// The kept parameters (a copy of the weights at step 7, widened) and
	// the session record must come back exactly: float64 bytes in, float64
	// bytes out, and the record as it was written.
	var kept [][]float64
	for _, p := range part.Params() {
		w := make([]float64, len(p.Value))
		for i, v := range p.Value {
			w[i] = float64(v)
		}
		kept = append(kept, w)
	}
	session := json.RawMessage(`{"rate":0.01,"best":{"epoch":3}}`)
	if err := modelfile.Save(path, &modelfile.Model[float32]{Network: n, Normalized: part, Checkpoint: &st, Kept: kept, Session: session}); err != nil {
		t.Fatal(err)
	}
	back, err := modelfile.Load[float32](path)
	if err != nil {
		t.Fatal(err)
	}
	if string(back.Session) != string(session) {
		t.Errorf("session record read back as %s, want %s", back.Session, session)
	}
	if len(back.Kept) != len(kept) {
		t.Fatalf("%d kept parameters read back, want %d", len(back.Kept), len(kept))
	}
	for i := range kept {
		if !slices.Equal(back.Kept[i], kept[i]) {
			t.Errorf("kept parameter %d differs after the round trip", i)
		}
	}
	if back.Checkpoint == nil || back.Checkpoint.Step != 7 || len(back.Checkpoint.Velocity) != len(part.Params()) {
		t.Fatalf("checkpoint read back as %+v", back.Checkpoint)
	}
	run(back.Normalized, s, back.Checkpoint)
	for i, p := range whole.Params() {
		for j, v := range p.Value {
			if math.Float32bits(v) != math.Float32bits(back.Normalized.Params()[i].Value[j]) {
				t.Fatalf("%s[%d]: resumed %v, uninterrupted %v", p.Name, j, back.Normalized.Params()[i].Value[j], v)
			}
		}
	}
}

// fix rewrites the checksum of a mutated file, so that the checks behind
// it are reached.
func fix(b []byte) []byte {
	b = append([]byte(nil), b...)
	sum := sha256.Sum256(b[:len(b)-32])
	copy(b[len(b)-32:], sum[:])
	return b
}

func TestBadFiles(t *testing.T) {
	good := encode(t, &modelfile.Model[float64]{Network: network[float64](t, 1)})
	hl := int(binary.LittleEndian.Uint32(good[12:]))
	headerJSON := string(good[16 : 16+hl])
	withHeader := func(h string) []byte {
		var b bytes.Buffer
		b.Write(good[:12])
		binary.Write(&b, binary.LittleEndian, uint32(len(h)))
		b.WriteString(h)
		for b.Len()%8 != 0 {
			b.WriteByte(0)
		}
		d := (16 + hl + 7) / 8 * 8
		b.Write(good[d : len(good)-32])
		b.Write(make([]byte, 32))
		return fix(b.Bytes())
	}
	cases := []struct {
		name string
		b    []byte
		is   error
	}{
		{"empty", nil, modelfile.ErrTruncated},
		{"magic", append([]byte("NOTAMODL"), good[8:]...), modelfile.ErrMagic},
		{"version", fix(append(append(append([]byte(nil), good[:8]...), 3, 0, 0, 0), good[12:]...)), modelfile.ErrVersion},
		{"cut in the header", good[:40], modelfile.ErrTruncated},
		{"cut in the data", good[:len(good)-100], modelfile.ErrTruncated},
		{"one byte flipped", func() []byte { b := append([]byte(nil), good...); b[len(b)-60] ^= 1; return b }(), modelfile.ErrChecksum},
		{"trailing byte", fix(append(append([]byte(nil), good...), 0)), modelfile.ErrTruncated},
		{"units changed", withHeader(strings.Replace(headerJSON, `"units":7`, `"units":8`, 1)), modelfile.ErrShape},
		{"huge shape", withHeader(strings.Replace(headerJSON, `"dims":[7,6]`, `"dims":[700000000,6000000]`, 1)), modelfile.ErrTruncated},
		{"unknown field", withHeader(strings.Replace(headerJSON, `"format"`, `"colour":1,"format"`, 1)), modelfile.ErrHeader},
	}
	for _, c := range cases {
		_, err := modelfile.Read[float64](c.b, "bad.model")
		var fe *modelfile.FormatError
		if !errors.As(err, &fe) || !errors.Is(err, c.is) {
			t.Errorf("%s: error %v, want a FormatError wrapping %v", c.name, err, c.is)
			continue
		}
		if !strings.HasPrefix(err.Error(), "bad.model") {
			t.Errorf("%s: error %q does not name the file", c.name, err)
		}
	}
	// Every truncation is refused.
	for n := 0; n < len(good); n += 7 {
		if _, err := modelfile.Read[float64](good[:n], "cut"); err == nil {
			t.Fatalf("a file cut to %d of %d bytes was accepted", n, len(good))
		}
	}
}

func TestSaveIsAtomic(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "m.model")
	m := &modelfile.Model[float32]{Network: network[float32](t, 1)}
	if err := modelfile.Save(path, m); err != nil {
		t.Fatal(err)
	}
	first, _ := os.ReadFile(path)
	// A save that cannot encode leaves the old file as it was and no
	// temporary file behind.
	broken := &modelfile.Model[float32]{Network: m.Network, Checkpoint: &optim.State{Velocity: [][]float64{{1}}}}
	if err := modelfile.Save(path, broken); err == nil {
		t.Fatal("an inconsistent checkpoint was saved")
	}
	m2 := &modelfile.Model[float32]{Network: network[float32](t, 2)}
	if err := modelfile.Save(path, m2); err != nil {
		t.Fatal(err)
	}
	entries, _ := os.ReadDir(dir)
	if len(entries) != 1 {
		t.Errorf("directory holds %d entries after saving, want only the model", len(entries))
	}
	second, _ := os.ReadFile(path)
	if bytes.Equal(first, second) {
		t.Error("the second save did not replace the file")
	}
	if err := modelfile.Save(filepath.Join(dir, "missing", "m.model"), m); err == nil {
		t.Error("saving into a missing directory succeeded")
	}
}

// FuzzRead feeds the reader mutated files, with the checksum repaired so
// the checks behind it run. It must never panic, and never allocate far
// beyond the file's own size (a lying header must not cost memory).
func FuzzRead(f *testing.F) {
	n := network[float64](f, 1)
	w, _ := normalize.Wrap(network[float64](f, 2), normalize.Options{PerUnit: true})
	f.Add(encode(f, &modelfile.Model[float64]{Network: n}), true)
	f.Add(encode(f, &modelfile.Model[float64]{Network: w.Base(), Normalized: w}), false)
	f.Fuzz(func(t *testing.T, b []byte, repair bool) {
		if repair && len(b) >= 48 {
			b = fix(b)
		}
		var before, after runtime.MemStats
		runtime.ReadMemStats(&before)
		m, err := modelfile.Read[float64](b, "fuzz")
		runtime.ReadMemStats(&after)
		if err == nil && m.Network == nil {
			t.Fatal("no error and no network")
		}
		// Weights and their gradients (2× what the file holds, widened to
		// float64: 4× for float32 tensors), the decoded header (a few times
		// its length), and at most maxFitCost of polynomial fitting (about
		// 14 MiB): 16 MiB + 16 bytes per file byte bounds it generously.
		if got, limit := after.TotalAlloc-before.TotalAlloc, uint64(16<<20+16*len(b)); got > limit {
			t.Fatalf("reading %d bytes allocated %d bytes (limit %d)", len(b), got, limit)
		}
	})
}
