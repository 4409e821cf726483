package kern

import (
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"strings"
	"sync"
	"testing"
)

// The tests below compare Gemm with a naive triple loop computed in
// float64, on matrices laid out in guarded buffers.
//
// Guards follow gonum's internal/asm/f64/asm_test.go (newGuardedVector,
// guardVector): every matrix lives in a larger buffer whose elements before
// and after it, and in the padding between its rows (row stride larger than
// the row length), hold sentinel values that are checked after the call.
// A and B are surrounded by NaN, as gonum does: a read outside the matrix
// poisons the result, and the result check fails. C is surrounded by a
// finite sentinel: any write outside the matrix changes it, and the guard
// check compares bits.
//
// Tolerance. The standard bound for a dot product computed in floating
// point with unit roundoff u, in any order of summation, is
//
//	|fl(Σ x_i y_i) − Σ x_i y_i| ≤ γ_n Σ |x_i y_i|,   γ_n = n·u / (1 − n·u)
//
// (Higham, Accuracy and Stability of Numerical Algorithms, 2nd ed., §3.1,
// eq. (3.5) and Lemma 3.1; cited from memory). An element of
// alpha·op(A)·op(B) + beta·C is a sum of k + 1 terms: each product term
// alpha·a·b carries two multiplications and at most k additions, the term
// beta·c one multiplication and at most k additions. Every term is thus
// perturbed by at most k + 2 factors (1 + δ), |δ| ≤ u, and
//
//	|computed − exact| ≤ γ_{k+2} · (|alpha| Σ_l |a_il||b_lj| + |beta||c_ij|).
//
// A fused multiply-add rounds once instead of twice, so the bound holds
// whether or not the compiler or the assembly fuses. The reference is
// computed the same way in float64 and has the same bound with u = 2^-53,
// so the test allows γ_{k+2}(u_T) + γ_{k+2}(2^-53) times the sum of
// magnitudes. The data are drawn so that nothing underflows, where the
// model fl(x ∘ y) = (x ∘ y)(1 + δ) would not hold: entries are multiples
// of 2^-23 (float32) or 2^-52 (float64) in [−1, 1), so nonzero products
// times |alpha| ≥ 1/4 exceed 2^-48 or 2^-106, far above the smallest
// normal numbers, 2^-126 and 2^-1022.

const guardLen = 5 // sentinel elements before and after every matrix

var (
	// cGuard marks C's surroundings; any finite value that no computation
	// here produces will do.
	cGuard = 4321.125
	// sizes holds the values every dimension must take at least once: one
	// below, at and above the micro-kernels' block widths and their
	// multiples (16, 32, 64, 128, 192 = 16·12), sizes whose remainders
	// modulo 6, 8, 12, 24 and 48 differ, and small odd sizes that leave
	// edge blocks and the packing's element-by-element remainders.
	sizes = []int{1, 2, 3, 7, 15, 16, 17, 31, 33, 64, 65, 127, 129, 191, 193, 200}
	// alphaBeta pairs cover alpha = 0 (A and B not referenced, C scaled),
	// beta = 0 (C overwritten, never read), beta = 1, and values that are not
	// powers of two. All are exact in float32.
	alphaBeta = [][2]float64{{1, 0}, {-0.75, 0}, {0, 0}, {0, 1}, {0, 1.25}, {1, 1}, {1.5, -0.25}}
)

// shapes returns a covering set of (m, n, k): two cyclic designs in which
// every value of sizes appears in each dimension, combined with different
// partners, plus large products that cross several tiles (and so take the
// parallel path when GOMAXPROCS > 1) and whose last block row or column is
// a single element wide for some kernel (385 = 32·12 + 1 = 16·24 + 1).
func shapes() [][3]int {
	var s [][3]int
	n := len(sizes)
	for _, shift := range [][2]int{{5, 11}, {3, 1}} {
		for i := range n {
			s = append(s, [3]int{sizes[i], sizes[(i+shift[0])%n], sizes[(i+shift[1])%n]})
		}
	}
	return append(s, [3]int{300, 400, 50}, [3]int{129, 385, 193}, [3]int{200, 193, 129})
}

func unitRoundoff[T Float]() float64 {
	var z T
	if _, ok := any(z).(float32); ok {
		return 0x1p-24
	}
	return 0x1p-53
}

func gamma(n int, u float64) float64 {
	nu := float64(n) * u
	return nu / (1 - nu)
}

func bitsOf[T Float](x T) uint64 {
	switch v := any(x).(type) {
	case float32:
		return uint64(math.Float32bits(v))
	case float64:
		return math.Float64bits(v)
	}
	panic("unreachable")
}

func floatName[T Float]() string {
	var z T
	if _, ok := any(z).(float32); ok {
		return "float=32"
	}
	return "float=64"
}

// stored is a rows×cols matrix with row stride ld in a guarded buffer.
type stored[T Float] struct {
	whole          []T // guardLen sentinels, the matrix, guardLen sentinels
	s              []T // the part handed to Gemm: (rows−1)·ld + cols elements
	rows, cols, ld int
}

func newStored[T Float](rows, cols, pad int, guard T) *stored[T] {
	ld := cols + pad
	n := (rows-1)*ld + cols
	whole := make([]T, guardLen+n+guardLen)
	for i := range whole {
		whole[i] = guard
	}
	// The slice keeps its capacity into the back guard, as in gonum's
	// tests, so that a reslice beyond its length writes into the guard
	// (and is caught) instead of panicking.
	return &stored[T]{whole: whole, s: whole[guardLen : guardLen+n], rows: rows, cols: cols, ld: ld}
}

// element reports whether whole[p] is an element of the matrix.
func (m *stored[T]) element(p int) bool {
	q := p - guardLen
	return q >= 0 && q < len(m.s) && q%m.ld < m.cols
}

func (m *stored[T]) snapshot() []T { return append([]T(nil), m.whole...) }

// operand stores the logical r×c matrix v (row-major, exact values of T)
// as Gemm expects op(X) = v: as is when t is false, transposed when true.
func operand[T Float](v []float64, r, c int, t bool, pad int) *stored[T] {
	nan := T(math.NaN())
	if !t {
		m := newStored(r, c, pad, nan)
		for i := range r {
			for j := range c {
				m.s[i*m.ld+j] = T(v[i*c+j])
			}
		}
		return m
	}
	m := newStored(c, r, pad, nan)
	for i := range r {
		for j := range c {
			m.s[j*m.ld+i] = T(v[i*c+j])
		}
	}
	return m
}

// draw returns n values of T in [−1, 1), as float64 (exactly): multiples
// of 2^-23 for float32 and of 2^-52 for float64, so that 2x − 1 is exact.
func draw[T Float](rng *rand.Rand, n int) []float64 {
	v := make([]float64, n)
	var z T
	_, single := any(z).(float32)
	for i := range v {
		if single {
			v[i] = float64(2*rng.Float32() - 1)
		} else {
			v[i] = 2*rng.Float64() - 1
		}
	}
	return v
}

// naive returns P = op(A)·op(B) and S = |op(A)|·|op(B)| (m×n) from the
// logical matrices la (m×k) and lb (k×n), by the textbook triple loop in
// float64.
func naive(la, lb []float64, m, n, k int) (p, s []float64) {
	p, s = make([]float64, m*n), make([]float64, m*n)
	for i := range m {
		for j := range n {
			var sum, abs float64
			for l := range k {
				x := la[i*k+l] * lb[l*n+j]
				sum += x
				abs += math.Abs(x)
			}
			p[i*n+j], s[i*n+j] = sum, abs
		}
	}
	return p, s
}

// problem is one call of Gemm with its inputs kept for checking.
type problem[T Float] struct {
	tA, tB       bool
	m, n, k      int
	alpha, beta  T
	a, b, c      *stored[T]
	a0, b0       []T       // snapshots of A's and B's buffers before the call
	c0           []float64 // C's matrix elements before the call (m×n)
	p, s         []float64 // naive(op(A), op(B))
	label        string
	maxErrReport int
}

// newProblem lays out the logical operands and a random C. When beta is 0
// C's elements are set to NaN: BLAS semantics (reference BLAS dgemm.f
// documentation, "when BETA is supplied as zero then C need not be set on
// input", from memory) say C is then not read, and the layers rely on it,
// since they write into buffers that hold the previous batch.
func newProblem[T Float](rng *rand.Rand, tA, tB bool, m, n, k int, la, lb, p, s []float64, alpha, beta float64, pads [3]int) *problem[T] {
	pr := &problem[T]{tA: tA, tB: tB, m: m, n: n, k: k, alpha: T(alpha), beta: T(beta), p: p, s: s, maxErrReport: 5}
	pr.a = operand[T](la, m, k, tA, pads[0])
	pr.b = operand[T](lb, k, n, tB, pads[1])
	pr.c = newStored(m, n, pads[2], T(cGuard))
	pr.c0 = draw[T](rng, m*n)
	for i := range m {
		for j := range n {
			v := T(pr.c0[i*n+j])
			if beta == 0 {
				v = T(math.NaN())
			}
			pr.c.s[i*pr.c.ld+j] = v
		}
	}
	pr.a0, pr.b0 = pr.a.snapshot(), pr.b.snapshot()
	pr.label = fmt.Sprintf("%s tA=%v tB=%v m=%d n=%d k=%d alpha=%v beta=%v lda=%d ldb=%d ldc=%d",
		floatName[T](), tA, tB, m, n, k, alpha, beta, pr.a.ld, pr.b.ld, pr.c.ld)
	return pr
}

func (pr *problem[T]) run() {
	Gemm(pr.tA, pr.tB, pr.m, pr.n, pr.k, pr.alpha, pr.a.s, pr.a.ld, pr.b.s, pr.b.ld, pr.beta, pr.c.s, pr.c.ld)
}

// check returns what is wrong with the result: elements outside the
// error bound, a changed guard or padding element of C, a changed element
// of A's or B's buffers.
func (pr *problem[T]) check() []string {
	var errs []string
	report := func(format string, args ...any) {
		if len(errs) < pr.maxErrReport {
			errs = append(errs, fmt.Sprintf(format, args...))
		}
	}
	m, n, k := pr.m, pr.n, pr.k
	alpha, beta := float64(pr.alpha), float64(pr.beta)
	tol := gamma(k+2, unitRoundoff[T]()) + gamma(k+2, 0x1p-53)
	for i := range m {
		for j := range n {
			got := pr.c.s[i*pr.c.ld+j]
			c0 := pr.c0[i*n+j]
			if beta == 0 {
				c0 = 0 // C was NaN and must not have been read
			}
			if alpha == 0 {
				// Exact: with alpha = 0 BLAS computes C = beta·C (or 0)
				// without touching A and B.
				want := T(beta) * T(c0)
				if bitsOf(got) != bitsOf(want) {
					report("C[%d,%d] = %v, want beta·C = %v exactly", i, j, got, want)
				}
				continue
			}
			ref := alpha*pr.p[i*n+j] + beta*c0
			bound := tol * (math.Abs(alpha)*pr.s[i*n+j] + math.Abs(beta*c0))
			if d := math.Abs(float64(got) - ref); !(d <= bound) { // NaN fails
				report("C[%d,%d] = %v, reference %v: |diff| %.3g > bound %.3g", i, j, got, ref, d, bound)
			}
		}
	}
	for p, v := range pr.c.whole {
		if !pr.c.element(p) && bitsOf(v) != bitsOf(T(cGuard)) {
			report("C's buffer at %d (offset %d from the matrix start), outside the matrix, changed to %v", p, p-guardLen, v)
		}
	}
	for name, pair := range map[string][2][]T{"A": {pr.a.whole, pr.a0}, "B": {pr.b.whole, pr.b0}} {
		for p := range pair[0] {
			if bitsOf(pair[0][p]) != bitsOf(pair[1][p]) {
				report("%s's buffer changed at %d: %v, was %v", name, p, pair[0][p], pair[1][p])
			}
		}
	}
	return errs
}

func testAgainstNaive[T Float](t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 1))
	for si, sh := range shapes() {
		m, n, k := sh[0], sh[1], sh[2]
		la, lb := draw[T](rng, m*k), draw[T](rng, k*n)
		p, s := naive(la, lb, m, n, k)
		// Pads from 1 to 4 elements, different for A, B and C.
		pads := [3]int{si%4 + 1, (si+1)%4 + 1, (si+2)%4 + 1}
		for _, tA := range []bool{false, true} {
			for _, tB := range []bool{false, true} {
				for _, ab := range alphaBeta {
					pr := newProblem[T](rng, tA, tB, m, n, k, la, lb, p, s, ab[0], ab[1], pads)
					pr.run()
					if errs := pr.check(); len(errs) > 0 {
						t.Errorf("%s:\n\t%s", pr.label, strings.Join(errs, "\n\t"))
					}
				}
			}
		}
	}
}

// TestGemmNaive checks every transposition variant, alpha/beta pair and
// covering shape against the naive float64 product, with guards; see the
// comment at the top of the file for the bound.
func TestGemmNaive(t *testing.T) {
	t.Run("float=64", testAgainstNaive[float64])
	t.Run("float=32", testAgainstNaive[float32])
}

// TestCheckCanFail shows that the checks above detect what they are meant
// to: an element moved by a few times the bound, a write into C's padding
// and a write into A's guard. Without this a check that never fires would
// pass every test.
func TestCheckCanFail(t *testing.T) {
	rng := rand.New(rand.NewPCG(2, 2))
	m, n, k := 33, 17, 65
	la, lb := draw[float32](rng, m*k), draw[float32](rng, k*n)
	p, s := naive(la, lb, m, n, k)
	fresh := func() *problem[float32] {
		pr := newProblem[float32](rng, true, false, m, n, k, la, lb, p, s, 1.5, -0.25, [3]int{2, 3, 1})
		pr.run()
		if errs := pr.check(); len(errs) > 0 {
			t.Fatalf("unperturbed result fails: %v", errs)
		}
		return pr
	}
	pr := fresh()
	// Bound for element (3, 4), times 4: the element is then at least
	// three bounds from the reference.
	ref := 1.5*p[3*n+4] - 0.25*pr.c0[3*n+4]
	bound := (gamma(k+2, 0x1p-24) + gamma(k+2, 0x1p-53)) * (1.5*s[3*n+4] + 0.25*math.Abs(pr.c0[3*n+4]))
	pr.c.s[3*pr.c.ld+4] = float32(ref + 4*bound)
	if len(pr.check()) == 0 {
		t.Error("an element 4 bounds off the reference passed the check")
	}
	pr = fresh()
	pr.c.s[5*pr.c.ld+n] = 0 // first padding element of row 5
	if len(pr.check()) == 0 {
		t.Error("a write into C's row padding passed the check")
	}
	pr = fresh()
	pr.a.whole[len(pr.a.whole)-1] = 1
	if len(pr.check()) == 0 {
		t.Error("a write into A's back guard passed the check")
	}
}

// started returns how many workers T's pool has started.
func started[T Float]() int {
	var z T
	lock := func(mu *sync.Mutex, n *int) int { mu.Lock(); defer mu.Unlock(); return *n }
	if _, ok := any(z).(float32); ok {
		return lock(&pool32.mu, &pool32.started)
	}
	return lock(&pool64.mu, &pool64.started)
}

// poolMutex returns T's pool lock.
func poolMutex[T Float]() *sync.Mutex {
	var z T
	if _, ok := any(z).(float32); ok {
		return &pool32.mu
	}
	return &pool64.mu
}

// takesParallelPath reports whether Gemm, called now without contention,
// hands tiles to workers (the conditions in gemm).
func takesParallelPath[T Float](m, n, k int) bool {
	procs := runtime.GOMAXPROCS(0)
	if procs < 2 || m*n*k < parallelFlops {
		return false
	}
	mk := current[T]()
	tm, tn := plan(m, n, mk.mr, mk.nr, procs)
	return ((m+tm-1)/tm)*((n+tn-1)/tn) >= 2
}

func testDeterministic[T Float](t *testing.T) {
	// k = 300 > kcBlock: two blocks of the inner dimension, so the rule's
	// block boundary is crossed.
	const m, n, k = 200, 300, 300
	rng := rand.New(rand.NewPCG(3, 3))
	la, lb := draw[T](rng, m*k), draw[T](rng, k*n)
	for _, tA := range []bool{false, true} {
		for _, tB := range []bool{false, true} {
			pr := newProblem[T](rng, tA, tB, m, n, k, la, lb, nil, nil, 1.25, 0.5, [3]int{1, 2, 3})
			start := pr.c.snapshot()
			result := func(procs int) []T {
				runtime.GOMAXPROCS(procs)
				copy(pr.c.whole, start)
				if parallel := takesParallelPath[T](m, n, k); parallel != (procs >= 2) {
					t.Fatalf("GOMAXPROCS=%d: parallel path %v, want %v", procs, parallel, procs >= 2)
				}
				pr.run()
				if procs >= 2 && started[T]() < 1 {
					t.Fatalf("GOMAXPROCS=%d: no worker started; the parallel path was not taken", procs)
				}
				return append([]T(nil), pr.c.s...)
			}
			one, two := result(1), result(2)
			// Untiled: every element on its own by the rule of the
			// package doc, which is what every element's value must be.
			untiled := ruleProduct(pr, start[guardLen:guardLen+len(pr.c.s)], 0)
			diffs := 0
			for i := range one {
				if bitsOf(one[i]) != bitsOf(two[i]) || bitsOf(one[i]) != bitsOf(untiled[i]) {
					if diffs++; diffs <= 3 {
						t.Errorf("%s: element %d: GOMAXPROCS=1 %v, GOMAXPROCS=2 %v, element alone %v", pr.label, i, one[i], two[i], untiled[i])
					}
				}
			}
			if diffs > 3 {
				t.Errorf("%s: %d elements differ in all", pr.label, diffs)
			}
		}
	}
}

// TestGemmDeterministic checks the package doc's claim: the same inputs
// give the same bits whatever GOMAXPROCS is, and equal to each element
// computed alone (no tiling at all).
func TestGemmDeterministic(t *testing.T) {
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	t.Run("float=64", testDeterministic[float64])
	t.Run("float=32", testDeterministic[float32])
}

func testAllocs[T Float](t *testing.T) {
	rng := rand.New(rand.NewPCG(4, 4))
	call := func(m, n, k int) func() {
		a, b, c := draw[T](rng, m*k), draw[T](rng, k*n), make([]T, m*n)
		at, bt := make([]T, len(a)), make([]T, len(b))
		for i := range a {
			at[i] = T(a[i])
		}
		for i := range b {
			bt[i] = T(b[i])
		}
		return func() { Gemm(false, true, m, n, k, 1, at, k, bt, k, 0, c, n) }
	}
	small, large := call(16, 17, 15), call(300, 400, 50)
	small()
	large()
	// testing.AllocsPerRun sets GOMAXPROCS to 1 while it measures (its
	// documentation), so it sees only the serial path.
	if got := testing.AllocsPerRun(20, small); got != 0 {
		t.Errorf("small product (16×17×15): %v allocations per call, want 0", got)
	}
	if got := testing.AllocsPerRun(5, large); got != 0 {
		t.Errorf("large product (300×400×50), serial path: %v allocations per call, want 0", got)
	}
	// The parallel path is measured the way AllocsPerRun measures, from
	// runtime.MemStats.Mallocs, but with GOMAXPROCS = 2.
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(2))
	if !takesParallelPath[T](300, 400, 50) {
		t.Fatal("300×400×50 does not take the parallel path at GOMAXPROCS=2")
	}
	large() // warm-up: starts the workers
	const runs = 10
	var before, after runtime.MemStats
	runtime.ReadMemStats(&before)
	for range runs {
		large()
	}
	runtime.ReadMemStats(&after)
	if started[T]() < 1 {
		t.Fatal("no worker started; the parallel path was not taken")
	}
	if got := (after.Mallocs - before.Mallocs) / runs; got != 0 {
		t.Errorf("large product (300×400×50), parallel path: %d allocations per call, want 0", got)
	}
}

// TestGemmAllocs checks the package's reason to exist: after warm-up,
// Gemm allocates nothing, on the serial and on the parallel path.
func TestGemmAllocs(t *testing.T) {
	t.Run("float=64", testAllocs[float64])
	t.Run("float=32", testAllocs[float32])
}

func testConcurrent[T Float](t *testing.T, wg *sync.WaitGroup, seed uint64) {
	const m, n, k, callers, reps = 200, 300, 70, 4, 3
	rng := rand.New(rand.NewPCG(5, seed))
	probs := make([]*problem[T], callers)
	want := make([][]T, callers)
	for g := range probs {
		la, lb := draw[T](rng, m*k), draw[T](rng, k*n)
		p, s := naive(la, lb, m, n, k)
		pr := newProblem[T](rng, g%2 == 1, g/2 == 1, m, n, k, la, lb, p, s, 0.75, -1.5, [3]int{1, 2, 3})
		start := pr.c.snapshot()
		pr.run() // alone: by TestGemmDeterministic, the bits every call must give
		if errs := pr.check(); len(errs) > 0 {
			t.Fatalf("%s, alone:\n\t%s", pr.label, strings.Join(errs, "\n\t"))
		}
		want[g] = pr.c.snapshot()
		copy(pr.c.whole, start)
		probs[g] = pr
	}
	starts := make([][]T, callers)
	for g, pr := range probs {
		starts[g] = pr.c.snapshot()
	}
	for g, pr := range probs {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for r := range reps {
				copy(pr.c.whole, starts[g])
				pr.run()
				for i, v := range pr.c.whole {
					if bitsOf(v) != bitsOf(want[g][i]) {
						t.Errorf("%s, caller %d, call %d: buffer element %d is %v, alone it was %v", pr.label, g, r, i, v, want[g][i])
						return
					}
				}
			}
		}()
	}
}

// TestGemmConcurrent runs several callers at once on both pools. One
// caller at a time gets a pool; the others fall back to computing on their
// own goroutine (the TryLock in gemm). Every caller must get the bits it
// gets alone. Run with -race to check the pool's synchronization.
func TestGemmConcurrent(t *testing.T) {
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(2))
	var wg sync.WaitGroup
	testConcurrent[float64](t, &wg, 1)
	testConcurrent[float32](t, &wg, 2)
	wg.Wait()

	// The fallback, made certain: hold the pool's lock, as a concurrent
	// caller would, and compute a product that would otherwise take the
	// parallel path.
	for _, f := range []func(t *testing.T){fallback[float64], fallback[float32]} {
		f(t)
	}
}

func fallback[T Float](t *testing.T) {
	const m, n, k = 300, 400, 50
	if !takesParallelPath[T](m, n, k) {
		t.Fatal("300×400×50 does not take the parallel path at GOMAXPROCS=2")
	}
	rng := rand.New(rand.NewPCG(6, 6))
	la, lb := draw[T](rng, m*k), draw[T](rng, k*n)
	p, s := naive(la, lb, m, n, k)
	pr := newProblem[T](rng, true, true, m, n, k, la, lb, p, s, 1, 0, [3]int{3, 1, 2})
	mu := poolMutex[T]()
	mu.Lock()
	pr.run()
	mu.Unlock()
	if errs := pr.check(); len(errs) > 0 {
		t.Errorf("%s, pool busy:\n\t%s", pr.label, strings.Join(errs, "\n\t"))
	}
}

// Gemm on row-major data: C = A·Bᵀ, the product a dense layer computes
// (inputs times transposed weights). Worked by hand: row (1, 2, 3) of A
// against rows (1, 0, −1) and (2, 1, 0) of B gives −2 and 4.
func ExampleGemm() {
	a := []float64{
		1, 2, 3,
		4, 5, 6,
	}
	b := []float64{
		1, 0, -1,
		2, 1, 0,
	}
	c := make([]float64, 4)
	Gemm(false, true, 2, 2, 3, 1, a, 3, b, 3, 0, c, 2)
	fmt.Println(c)
	// Output: [-2 4 -2 13]
}

// TestGemmShortSlicePanicsOnCaller: a short slice panics on the caller's
// goroutine, where it can be recovered, never in a pool worker.
func TestGemmShortSlicePanicsOnCaller(t *testing.T) {
	const m, n, k = 300, 400, 50
	a, b, c := make([]float64, m*k), make([]float64, k*n), make([]float64, m*n-1)
	defer func() {
		if r := recover(); r == nil {
			t.Error("a short C was accepted")
		}
	}()
	Gemm(false, false, m, n, k, 1, a, k, b, n, 0, c, n)
}
