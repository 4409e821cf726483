package optim

import (
	"errors"
	"math"
	"math/rand/v2"
	"runtime"
	"testing"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net"
)

// TestUpdatePassGuards checks the one pass that keeps the rollback copy,
// steps, and looks for a bad gradient only where a value went bad
// (Trainer.update) against the rule it must keep: the new values are those of the serial noise-free step
// (stepExact) bit for bit; a non-finite gradient anywhere is reported
// before a non-finite update, with the smallest index of the first
// parameter that has one; and after either error every value and
// velocity holds the bits it had before the step. The network is large
// enough that its weight matrices are shared by the workers of
// internal/kern in chunks, and the bad elements sit in different chunks;
// run with one and two threads.
func TestUpdatePassGuards(t *testing.T) {
	n, err := net.NewBuilder[float32](200).Dense("h1", 256).ReLU("r1").Dense("h2", 256).ReLU("r2").Readout("out", 10).Build()
	if err != nil {
		t.Fatal(err)
	}
	if err := n.Init(net.InitSettings{Seed: 3, Rho0: 1}); err != nil {
		t.Fatal(err)
	}
	set := &data.Set[float32]{Rows: 4, Features: 200, Outputs: 10, X: make([]float32, 800), Y: make([]float32, 40)}
	tr, err := NewTrainer(Model[float32](n), loss.Square[float32]{}, set, Settings{Momentum: 0.9, Nesterov: true, WeightDecay: 1e-3})
	if err != nil {
		t.Fatal(err)
	}
	if len(tr.params[0].Value) < 1<<15 || len(tr.params[1].Value) < 1<<15 {
		t.Fatalf("parameters of %d and %d elements: too small to be shared by the workers", len(tr.params[0].Value), len(tr.params[1].Value))
	}
	const lr = 0.05
	fill := func() {
		for i, p := range tr.params {
			for j := range p.Grad {
				p.Grad[j] = float32(math.Sin(float64(7*j + i)))
				tr.vel[i][j] = float32(math.Cos(float64(3*j+i))) / 10
			}
		}
	}
	snapshot := func() (vals, vels [][]float32) {
		for i, p := range tr.params {
			vals = append(vals, append([]float32(nil), p.Value...))
			vels = append(vels, append([]float32(nil), tr.vel[i]...))
		}
		return vals, vels
	}
	unchanged := func(t *testing.T, vals, vels [][]float32) {
		t.Helper()
		for i, p := range tr.params {
			for j := range p.Value {
				if math.Float32bits(p.Value[j]) != math.Float32bits(vals[i][j]) || math.Float32bits(tr.vel[i][j]) != math.Float32bits(vels[i][j]) {
					t.Fatalf("%s[%d]: value %v velocity %v after the refused step, were %v and %v", p.Name, j, p.Value[j], tr.vel[i][j], vals[i][j], vels[i][j])
				}
			}
		}
	}
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	for _, procs := range []int{1, 2} {
		runtime.GOMAXPROCS(procs)
		fill()
		vals, vels := snapshot()
		for i, p := range tr.params {
			d := 0.0
			if p.Decay {
				d = 2 * tr.s.WeightDecay
			}
			stepExact(vals[i], p.Grad, vels[i], lr, d, tr.s.Momentum, true)
		}
		if err := tr.update(lr); err != nil {
			t.Fatal(err)
		}
		unchanged(t, vals, vels) // here: equal to the serial step's bits

		// An overflowing update in h1 and, later in the order, two bad
		// gradients in h2 (in different chunks): the gradient wins.
		fill()
		vals, vels = snapshot()
		tr.params[0].Grad[100] = 3e38
		tr.params[1].Grad[50000] = float32(math.Inf(1))
		tr.params[1].Grad[40000] = float32(math.NaN())
		var nf *NonFiniteError
		if err := tr.update(1e3); !errors.As(err, &nf) || nf.What != "gradient of "+tr.params[1].Name || nf.Index != 40000 {
			t.Fatalf("GOMAXPROCS %d: %v, want the gradient of %s at 40000", procs, err, tr.params[1].Name)
		}
		unchanged(t, vals, vels)

		// The overflowing update alone.
		tr.params[1].Grad[50000], tr.params[1].Grad[40000] = 1, 1
		vals, vels = snapshot()
		if err := tr.update(1e3); !errors.As(err, &nf) || nf.What != "update of "+tr.params[0].Name || nf.Index != 100 {
			t.Fatalf("GOMAXPROCS %d: %v, want the update of %s at 100", procs, err, tr.params[0].Name)
		}
		unchanged(t, vals, vels)

		// A step size of 0 still turns an infinite gradient into a
		// non-finite value (0·∞ = NaN), so it is found.
		tr.params[0].Grad[100] = 1
		tr.params[2].Grad[3] = float32(math.Inf(-1))
		if err := tr.update(0); !errors.As(err, &nf) || nf.What != "gradient of "+tr.params[2].Name || nf.Index != 3 {
			t.Fatalf("GOMAXPROCS %d: %v, want the gradient of %s at 3", procs, err, tr.params[2].Name)
		}
		unchanged(t, vals, vels)
	}
}

// TestSplitMix checks splitMix against the first outputs of SplitMix64
// seeded with 0 (the generator's published reference sequence, values
// from memory: 0xe220a8397b1dcdaf, 0x6e789e6aa1b965f4, 0x06c45d188009454f).
func TestSplitMix(t *testing.T) {
	const golden = 0x9e3779b97f4a7c15
	for i, want := range []uint64{0xe220a8397b1dcdaf, 0x6e789e6aa1b965f4, 0x06c45d188009454f} {
		if got := splitMix(uint64(i) * golden); got != want {
			t.Errorf("output %d: %#x, want %#x", i, got, want)
		}
	}
}

// TestNoiseBlocks checks the Langevin step drawn block by block. With zero
// gradient, no decay and no momentum, a step moves every weight by σξ
// with ξ standard normal. Over the n ≥ 2^17 weights of one step: the mean
// of the moves lies within 5σ/√n of 0, their variance within
// 5·σ²·√(2/n) of σ² (the sample variance of n normal draws has standard
// deviation σ²√(2/(n−1)); closed form), and the correlation of two
// blocks, of one block in two steps, or of two parameters within
// 5/√noiseBlock of 0 (independent streams; the correlation of m
// independent pairs has standard deviation about 1/√m; common practice,
// no source). The bits do not depend on GOMAXPROCS, and a step refused
// for a bad gradient leaves the noise stream where it was.
func TestNoiseBlocks(t *testing.T) {
	build := func() (*Trainer[float64], *net.Network[float64]) {
		n, err := net.NewBuilder[float64](300).Dense("h1", 256).ReLU("r1").Dense("h2", 512).ReLU("r2").Readout("out", 10).Build()
		if err != nil {
			t.Fatal(err)
		}
		if err := n.Init(net.InitSettings{Seed: 3, Rho0: 1}); err != nil {
			t.Fatal(err)
		}
		set := &data.Set[float64]{Rows: 4, Features: 300, Outputs: 10, X: make([]float64, 1200), Y: make([]float64, 40)}
		tr, err := NewTrainer(Model[float64](n), loss.Square[float64]{}, set, Settings{Temperature: 0.5, Seed: 9})
		if err != nil {
			t.Fatal(err)
		}
		return tr, n
	}
	const lr = 0.01
	sigma := math.Sqrt(2 * lr * 0.5)
	moves := func(tr *Trainer[float64]) [][]float64 {
		var before [][]float64
		for _, p := range tr.params {
			before = append(before, append([]float64(nil), p.Value...))
			clear(p.Grad)
		}
		if err := tr.update(lr); err != nil {
			t.Fatal(err)
		}
		for i, p := range tr.params {
			for j := range p.Value {
				before[i][j] = p.Value[j] - before[i][j]
			}
		}
		return before
	}
	corr := func(a, b []float64) float64 {
		var sa, sb, sab, saa, sbb float64
		for i := range a {
			sa, sb = sa+a[i], sb+b[i]
		}
		ma, mb := sa/float64(len(a)), sb/float64(len(b))
		for i := range a {
			sab += (a[i] - ma) * (b[i] - mb)
			saa += (a[i] - ma) * (a[i] - ma)
			sbb += (b[i] - mb) * (b[i] - mb)
		}
		return sab / math.Sqrt(saa*sbb)
	}
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	var first [][]float64
	for _, procs := range []int{1, 2} {
		runtime.GOMAXPROCS(procs)
		tr, _ := build()
		step1, step2 := moves(tr), moves(tr)
		big := step1[1]
		if len(big) < 1<<17 {
			t.Fatalf("%d weights: too few for the bounds", len(big))
		}
		var s, ss float64
		for _, x := range big {
			s += x
			ss += x * x
		}
		m := float64(len(big))
		mean := s / m
		variance := (ss - m*mean*mean) / (m - 1)
		if math.Abs(mean) > 5*sigma/math.Sqrt(m) {
			t.Errorf("mean move %.3g, want within %.3g of 0", mean, 5*sigma/math.Sqrt(m))
		}
		if tol := 5 * sigma * sigma * math.Sqrt(2/m); math.Abs(variance-sigma*sigma) > tol {
			t.Errorf("variance of the moves %.6g, want %.6g ± %.3g", variance, sigma*sigma, tol)
		}
		lim := 5 / math.Sqrt(noiseBlock)
		blocks := func(x []float64, k int) []float64 { return x[k*noiseBlock : (k+1)*noiseBlock] }
		for name, r := range map[string]float64{
			"blocks 0 and 1":          corr(blocks(big, 0), blocks(big, 1)),
			"blocks 7 and 8":          corr(blocks(big, 7), blocks(big, 8)),
			"block 3 in two steps":    corr(blocks(big, 3), blocks(step2[1], 3)),
			"block 0 of h1 and of h2": corr(blocks(step1[0], 0), blocks(big, 0)),
		} {
			if math.Abs(r) > lim {
				t.Errorf("%s: correlation %.3f, want within %.3f of 0", name, r, lim)
			}
		}
		if first == nil {
			first = step1
			continue
		}
		for i := range first {
			for j := range first[i] {
				if math.Float64bits(first[i][j]) != math.Float64bits(step1[i][j]) {
					t.Fatalf("parameter %d [%d]: GOMAXPROCS %d moved it by %v, GOMAXPROCS 1 by %v", i, j, procs, step1[i][j], first[i][j])
				}
			}
		}
	}

	// A refused step leaves the stream: the next step draws what the
	// first step of a fresh trainer draws.
	tr, _ := build()
	for _, p := range tr.params {
		clear(p.Grad)
	}
	tr.params[1].Grad[5] = math.NaN()
	var nf *NonFiniteError
	if err := tr.update(lr); !errors.As(err, &nf) || nf.Index != 5 {
		t.Fatalf("%v, want a bad gradient at 5", err)
	}
	again := moves(tr)
	for i := range first {
		for j := range first[i] {
			if math.Float64bits(first[i][j]) != math.Float64bits(again[i][j]) {
				t.Fatalf("after a refused step, parameter %d [%d] moved by %v, want %v", i, j, again[i][j], first[i][j])
			}
		}
	}
}

// TestVectorStepSameBits checks the vector loop behind stepExact
// (kern.SGDStep, assembly where the processor has AVX2) against the scalar
// loop stepScalar bit for bit: plain, heavy ball and Nesterov, float32 and
// float64, lengths 0 to 67 (every remainder of the vector width) and one
// large one, on values drawn over many magnitudes with zeros, subnormals,
// values that overflow in the step, NaN and ±Inf mixed in; the index of
// the first non-finite value must agree as well.
func TestVectorStepSameBits(t *testing.T) {
	sameBitsAllModes[float32](t)
	sameBitsAllModes[float64](t)
}

func sameBitsAllModes[T net.Float](t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	special := []float64{0, math.Copysign(0, -1), math.SmallestNonzeroFloat64, 1e-40, 3e38, -3e38, 1e300, math.NaN(), math.Inf(1), math.Inf(-1)}
	draw := func(n int, specials bool) []T {
		x := make([]T, n)
		for i := range x {
			x[i] = T(rng.NormFloat64() * math.Pow(10, float64(rng.IntN(9)-4)))
			if specials && rng.IntN(40) == 0 {
				x[i] = T(special[rng.IntN(len(special))])
			}
		}
		return x
	}
	lengths := []int{1 << 12}
	for n := range 68 {
		lengths = append(lengths, n)
	}
	for _, n := range lengths {
		for mode := range 3 {
			for _, specials := range []bool{false, true} {
				val, grad := draw(n, false), draw(n, specials)
				var vel []T
				if mode > 0 {
					vel = draw(n, false)
				}
				lr, d, mu := 0.03*rng.Float64(), 2e-3*rng.Float64(), 0.9
				if specials && n > 0 && rng.IntN(2) == 0 {
					lr = 1e30 // overflow in the step itself
				}
				wantVal, wantVel := append([]T(nil), val...), append([]T(nil), vel...)
				if vel == nil {
					wantVel = nil
				}
				want := stepScalar(wantVal, grad, wantVel, lr, d, mu, mode == 2)
				got := stepExact(val, grad, vel, lr, d, mu, mode == 2)
				if got != want {
					t.Fatalf("%T n=%d mode %d: first bad index %d, scalar %d", val, n, mode, got, want)
				}
				for j := range val {
					if !sameBits(val[j], wantVal[j]) || vel != nil && !sameBits(vel[j], wantVel[j]) {
						t.Fatalf("%T n=%d mode %d [%d]: value %v velocity %v, scalar %v and %v", val, n, mode, j, val[j], velAt(vel, j), wantVal[j], velAt(wantVel, j))
					}
				}
			}
		}
	}
}

func velAt[T net.Float](v []T, j int) any {
	if v == nil {
		return nil
	}
	return v[j]
}

// sameBits compares two values bit for bit (NaNs by their bits too).
func sameBits[T net.Float](a, b T) bool {
	switch x := any(a).(type) {
	case float32:
		return math.Float32bits(x) == math.Float32bits(any(b).(float32))
	default:
		return math.Float64bits(any(a).(float64)) == math.Float64bits(any(b).(float64))
	}
}
