package kern

import (
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"testing"
)

// refUpdate is the elementwise work the tests spread with ParallelRange:
// the general loop of one SGD step with decay and (optional) momentum, one
// element at a time, in float64 (optim's rule: θ −= lr·(g + d·θ) without
// momentum; v = μv + g, g = v or g + μv, θ −= lr·g with it). Elements are
// independent, so the whole range in one call is also what any split of
// it must give, bit for bit.
func refUpdate[T Float](val, grad, vel []T, lr, d, mu float64, nesterov bool) int {
	bad := -1
	for j := range val {
		theta := float64(val[j])
		if vel == nil {
			theta -= float64(lr * (float64(grad[j]) + float64(d*theta)))
		} else {
			g := float64(grad[j]) + float64(d*theta)
			vj := float64(mu*float64(vel[j])) + g
			vel[j] = T(vj)
			if nesterov {
				g += float64(mu * vj)
			} else {
				g = vj
			}
			theta -= float64(lr * g)
		}
		nv := T(theta)
		if (math.IsNaN(float64(nv)) || math.IsInf(float64(nv), 0)) && bad < 0 {
			bad = j
		}
		val[j] = nv
	}
	return bad
}

// guarded returns a slice of n values from v inside a buffer with guardLen
// sentinels (cGuard) on each side, and the buffer.
func guarded[T Float](v []T) (s, whole []T) {
	whole = make([]T, len(v)+2*guardLen)
	for i := range whole {
		whole[i] = T(cGuard)
	}
	copy(whole[guardLen:], v)
	return whole[guardLen : guardLen+len(v) : guardLen+len(v)], whole
}

func checkGuards[T Float](t *testing.T, label, name string, whole []T) {
	t.Helper()
	n := len(whole) - 2*guardLen
	for i := range guardLen {
		for _, k := range []int{i, guardLen + n + i} {
			if bitsOf(whole[k]) != bitsOf(T(cGuard)) {
				t.Errorf("%s: %s guard %d overwritten: %v", label, name, k, whole[k])
			}
		}
	}
}

// updRanger runs refUpdate on chunks of its slices, for ParallelRange.
type updRanger[T Float] struct {
	val, grad, vel []T
	lr, d, mu      float64
	nesterov       bool
}

func (u *updRanger[T]) Range(lo, hi int) int {
	var vel []T
	if u.vel != nil {
		vel = u.vel[lo:hi]
	}
	if b := refUpdate(u.val[lo:hi], u.grad[lo:hi], vel, u.lr, u.d, u.mu, u.nesterov); b >= 0 {
		return lo + b
	}
	return -1
}

// Update is the tests' shorthand: refUpdate spread by ParallelRange.
func Update[T Float](val, grad, vel []T, lr, d, mu float64, nesterov bool) int {
	return ParallelRange(len(val), &updRanger[T]{val: val, grad: grad, vel: vel, lr: lr, d: d, mu: mu, nesterov: nesterov})
}

// updateLengths: every length up to 70 (the serial loop's edges), and
// around the parallel threshold and the chunk size, where the split's
// boundaries fall.
func updateLengths() []int {
	var ls []int
	for n := range 71 {
		ls = append(ls, n)
	}
	return append(ls, updateParallel-1, updateParallel, updateParallel+1,
		updateParallel+updateChunk-1, 5*updateChunk+77, 401408)
}

type updateCase struct {
	name     string
	momentum bool
	nesterov bool
}

var updateCases = []updateCase{{"plain", false, false}, {"heavy-ball", true, false}, {"nesterov", true, true}}

// runUpdateCase runs Update and the reference on the same random data and
// compares values, velocities, bad index and guards; plant lists indices
// where the gradient is set to NaN (or, every third one, the value to
// +Inf) before the step.
func runUpdateCase[T Float](t *testing.T, rng *rand.Rand, n int, c updateCase, plant []int) {
	t.Helper()
	label := fmt.Sprintf("n=%d/%s/GOMAXPROCS=%d/plant=%v", n, c.name, runtime.GOMAXPROCS(0), plant)
	val0, grad0, vel0 := make([]T, n), make([]T, n), make([]T, n)
	for i := range n {
		val0[i] = T(2*rng.Float64() - 1)
		grad0[i] = T(4*rng.Float64() - 2)
		vel0[i] = T(rng.Float64() - 0.5)
	}
	for q, i := range plant {
		if q%3 == 2 {
			val0[i] = T(math.Inf(1))
		} else {
			grad0[i] = T(math.NaN())
		}
	}
	// Learning rate, decay and momentum of ordinary training (common
	// practice, no source); any values exercise the same rounding.
	const lr, d, mu = 0.0625 + 1e-3, 2e-4, 0.9
	val, wv := guarded(val0)
	grad, wg := guarded(grad0)
	var vel, wvel, rvel []T
	if c.momentum {
		vel, wvel = guarded(vel0)
		rvel = append([]T(nil), vel0...)
	}
	rval := append([]T(nil), val0...)
	want := refUpdate(rval, grad0, rvel, lr, d, mu, c.nesterov)
	got := Update(val, grad, vel, lr, d, mu, c.nesterov)
	if got != want {
		t.Errorf("%s: bad index %d, want %d", label, got, want)
	}
	diffs := 0
	for i := range n {
		if bitsOf(val[i]) != bitsOf(rval[i]) || c.momentum && bitsOf(vel[i]) != bitsOf(rvel[i]) {
			if diffs++; diffs <= 3 {
				t.Errorf("%s: element %d differs from the reference", label, i)
			}
		}
	}
	checkGuards(t, label, "val", wv)
	checkGuards(t, label, "grad", wg)
	if c.momentum {
		checkGuards(t, label, "vel", wvel)
	}
}

// TestUpdate checks ParallelRange (through Update) bit for bit against
// the serial reference, at
// GOMAXPROCS 1 and 2, for every variant, with guards around every slice,
// and the bad-index rule (the smallest non-finite index, as the serial
// loop finds) with non-finite values planted at the start, the end, the
// chunk boundaries and in several chunks at once.
func TestUpdate(t *testing.T) {
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	t.Run("float=64", testUpdate[float64])
	t.Run("float=32", testUpdate[float32])
}

func testUpdate[T Float](t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 7))
	for _, procs := range []int{1, 2} {
		runtime.GOMAXPROCS(procs)
		for _, c := range updateCases {
			for _, n := range updateLengths() {
				if raceOn && n > 70 && n != updateParallel+1 {
					continue
				}
				runUpdateCase[T](t, rng, n, c, nil)
				if n == 0 {
					continue
				}
				runUpdateCase[T](t, rng, n, c, []int{n - 1})
				runUpdateCase[T](t, rng, n, c, []int{n / 2, n - 1, 0})
				if n > updateParallel {
					runUpdateCase[T](t, rng, n, c, []int{n - 1, updateChunk})
					runUpdateCase[T](t, rng, n, c, []int{n - 1, 3*updateChunk - 1, updateChunk + 5})
					runUpdateCase[T](t, rng, n, c, []int{2 * updateChunk, updateChunk - 1, 2*updateChunk + 1})
				}
			}
		}
		if procs == 2 && started[float64]() < 1 { // ParallelRange runs on the float64 pool
			t.Fatal("GOMAXPROCS=2: no worker started; the parallel path was not taken")
		}
	}
}

// TestUpdateAllocs checks that ParallelRange allocates nothing, on the serial
// path (testing.AllocsPerRun runs at GOMAXPROCS 1) and on the parallel
// one (counted from runtime.MemStats at GOMAXPROCS 2, as testAllocs does).
func TestUpdateAllocs(t *testing.T) {
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	t.Run("float=64", testUpdateAllocs[float64])
	t.Run("float=32", testUpdateAllocs[float32])
}

func testUpdateAllocs[T Float](t *testing.T) {
	const n = 4 * updateParallel
	val, grad, vel := make([]T, n), make([]T, n), make([]T, n)
	for i := range grad {
		grad[i] = T(i%7) / 8
	}
	// One ranger each, made once, as optim's trainer keeps its own: a
	// pointer in an interface costs nothing per call.
	plain := &updRanger[T]{val: val, grad: grad, lr: 1e-3}
	moment := &updRanger[T]{val: val, grad: grad, vel: vel, lr: 1e-3, d: 1e-4, mu: 0.9, nesterov: true}
	short := &updRanger[T]{val: val[:100], grad: grad, vel: vel, lr: 1e-3, d: 1e-4, mu: 0.9}
	call := func() {
		ParallelRange(n, plain)
		ParallelRange(n, moment)
	}
	small := func() { ParallelRange(100, short) }
	if got := testing.AllocsPerRun(10, small); got != 0 {
		t.Errorf("small update: %v allocations per call, want 0", got)
	}
	if got := testing.AllocsPerRun(5, call); got != 0 {
		t.Errorf("large update, serial path: %v allocations per call, want 0", got)
	}
	runtime.GOMAXPROCS(2)
	call() // warm-up: starts the workers
	const runs = 10
	var before, after runtime.MemStats
	runtime.ReadMemStats(&before)
	for range runs {
		call()
	}
	runtime.ReadMemStats(&after)
	if started[float64]() < 1 { // ParallelRange runs on the float64 pool
		t.Fatal("no worker started; the parallel path was not taken")
	}
	if got := (after.Mallocs - before.Mallocs) / runs; got != 0 {
		t.Errorf("large update, parallel path: %d allocations per call, want 0", got)
	}
}

// ParallelRange on a small range runs one call; the index it returns is
// the one the work reported (here, the first negative value).
func ExampleParallelRange() {
	v := []float64{3, 1, -4, 1, -5}
	fmt.Println(ParallelRange(len(v), firstNegative(v)))
	// Output: 2
}

type firstNegative []float64

func (f firstNegative) Range(lo, hi int) int {
	for i := lo; i < hi; i++ {
		if f[i] < 0 {
			return i
		}
	}
	return -1
}
