// Package kern is the one seam through which every matrix product in rhomb
// passes. Layers call Gemm and nothing else, so that the kernel can change
// without touching a layer.
//
// # How a product is computed
//
// Gemm follows the layout of Goto and van de Geijn ("Anatomy of
// high-performance matrix multiplication", ACM TOMS 34(3), 2008; from
// memory): C is cut into tiles; for each tile the inner dimension is cut
// into blocks of kcBlock steps; for each block, the tile's rows of op(A)
// and columns of op(B) are copied ("packed") into contiguous panels, mr
// rows or nr columns wide, laid out in the order a micro-kernel reads them;
// the micro-kernel then computes an mr×nr block of C in registers. The
// packed block of op(A) of a tile (tileRows()·kcBlock elements, at most 768 KiB
// in float64) fits in half the processor's second-level cache, and the
// kcBlock×nr panel of op(B) that a micro-kernel sweeps over many blocks of
// rows stays in the first-level cache.
//
// The micro-kernels are chosen once, at start-up, from the processor's
// features (golang.org/x/sys/cpu): AVX-512 (foundation and DQ), else AVX2
// with FMA, else the pure-Go kernel. Block shapes (rows × columns of C held
// in registers): AVX-512 12×32 float32 and 12×16 float64, with 16×16
// float32 for narrow products such as a 10-class readout; AVX2 6×16 and
// 6×8 (and a few other shapes that the benchmarks compare). The assembly is written by asmgen.go (float32 and
// float64 from one template). Packing transposes 8×8 (float32) and 4×4
// blocks in registers where the operand's layout needs it. Building with
// -tags noasm, or for another architecture, leaves only the pure-Go code.
//
// Large products, and large weight updates (Update), are spread over a
// fixed pool of workers that live for the whole process; each worker
// claims whole tiles (or chunks of an update), the caller from the front
// and the workers from the back (job.claim), and between products
// polls for the next one for spinFor before parking, so that the products
// of one training step do not each pay a wake-up. Small products, and every
// product when GOMAXPROCS is 1, run on the caller's goroutine; they take
// the assembly kernel whose block shape pads them least, and skip packing
// an operand whose layout the strided kernels can read in place (Aᵀ, or B
// not transposed). After the first call of a given size, Gemm allocates
// nothing.
//
// # Determinism
//
// Every element of C is computed by one fixed rule, whatever the tiling,
// the worker, the micro-kernel or GOMAXPROCS:
//
//	for each block b = 0, 1, … of kcBlock consecutive steps of the inner
//	dimension, in order:
//	    acc = 0; for l in the block, in order: acc = fma(op(A)[i,l], op(B)[l,j], acc)
//	    t = T(alpha·acc)
//	    c = t                       for the first block when beta == 0 (C is not read)
//	    c = fma(beta, c, t)         for the first block otherwise
//	    c = c + t (= fma(1, c, t))  for every later block
//
// where fma rounds once, in T (float32 products are rounded in float32).
// The assembly kernels compute exactly this rule with vector FMA
// instructions, and the pure-Go kernel with math.FMA (float64) or an exact
// emulation (float32); the tests check every kernel against the rule, bit
// for bit. Tiles split only the rows and columns of C, never the inner
// dimension. So the same inputs give the same bits on every run, for any
// GOMAXPROCS, with or without the noasm tag, and on any processor that
// rounds by IEEE 754 (which every amd64 and arm64 processor does).
// Two cases leave the rule: alpha == 0 or k == 0 give C = beta·C exactly
// (A and B are not read), and beta == 0 gives C = 0 there.
package kern

import (
	"github.com/rhomb/rhomb/internal/arith"
	"runtime"
	"sync"
	"sync/atomic"
	"time"
)

// Float is the set of element types rhomb computes in.
type Float interface{ float32 | float64 }

const (
	// kcBlock is the length of the inner-dimension blocks. It is part of
	// the rounding rule above, so it is the same for every kernel; 256
	// steps keep a 256×nr panel of op(B) in a 32 KiB first-level cache for
	// the AVX2 kernels (256·8·8 bytes in float64, 256·16·4 in float32).
	kcBlock = arith.KBlock
	// ncMax bounds a tile's columns (and tileRows its rows).
	ncMax = 512
	// parallelFlops is the number of multiply-adds below which a product
	// stays on the caller's goroutine: 2^18 take about 10 µs on one core
	// at 25 multiply-adds per nanosecond, well above the cost of waking a
	// worker (about a microsecond).
	parallelFlops = 1 << 18
)

// The micro-kernels in use, chosen once at start-up: the best first (in
// the lists available64 and available32), and the others of the same
// instruction set, which a product uses instead when their block shape
// fits it much better (a narrow C: the readout layer's ten columns). Every
// kernel rounds every element the same way (the rule above), so the choice
// changes speed only.
var (
	kernel64 = available64()[0]
	kernel32 = available32()[0]
	others64 = assembly(available64())
	others32 = assembly(available32())
	// onlyBest makes choose return best: the tests set it to run one
	// kernel on every shape.
	onlyBest = false
)

// assembly returns the assembly kernels of ks, in order.
func assembly[T Float](ks []microKernel[T]) []microKernel[T] {
	var s []microKernel[T]
	for _, k := range ks {
		if k.name != "go" {
			s = append(s, k)
		}
	}
	return s
}

// smallPick returns the index in others of the kernel with the least
// padded area for an m×n product, then the fewest blocks, then the first.
// It remembers its answers in memo: a small product's choice is
// otherwise a few dozen integer divisions, a visible part of its cost.
func smallPick[T Float](memo *pickMemo, others []microKernel[T], m, n int) int {
	fits := m < 1<<24 && n < 1<<24
	slot := &memo[(m*31+n)%len(memo)]
	key := uint64(m)<<40 | uint64(n)<<16
	if v := slot.Load(); fits && v&^0xffff == key && v&0xffff != 0 {
		return int(v&0xffff) - 1
	}
	pick, pa, pn := 0, -1, 0
	for i, c := range others {
		a := (m + c.mr - 1) / c.mr * c.mr * ((n + c.nr - 1) / c.nr * c.nr)
		nb := (m + c.mr - 1) / c.mr * ((n + c.nr - 1) / c.nr)
		if pa < 0 || a < pa || a == pa && nb < pn {
			pick, pa, pn = i, a, nb
		}
	}
	if fits {
		slot.Store(key | uint64(pick+1))
	}
	return pick
}

// pickMemo holds smallPick's recent answers, one per slot: m in the top
// 24 bits, n in the next 24, the index plus one in the low 16 (0: empty).
// A slot is one atomic word, so concurrent callers see a whole answer or
// none; the answer depends only on m and n, so the memo cannot change a
// result.
type pickMemo [64]atomic.Uint64

var memo64, memo32 pickMemo

// choose returns the kernel for an m×n×k product.
//
// A large product (parallelFlops or more) uses best, unless a sibling of
// the same instruction set computes less than 3/4 of best's padded area (m
// and n rounded up to whole blocks): there the loop sets the time, and
// best's loop is the fastest.
//
// A small product uses the assembly kernel (of either instruction set,
// best among them first) with the least padded area, then the fewest
// blocks, then the first in others (smallPick): there padding, edge
// blocks (computed aside and copied) and calls set the time. On the
// processor this was tuned on (Zen 4, which runs a 512-bit FMA as two
// 256-bit halves: BenchmarkPeak gives the same float64 rate for both
// instruction sets) a lane costs the same in either; on a processor with
// full-rate 512-bit FMAs a 256-bit block costs up to twice as much per
// lane, which may lose to a padded 512-bit block (not measured).
func choose[T Float](best microKernel[T], others []microKernel[T], memo *pickMemo, m, n, k int) microKernel[T] {
	if onlyBest {
		return best
	}
	area := func(k microKernel[T]) int { return (m + k.mr - 1) / k.mr * k.mr * ((n + k.nr - 1) / k.nr * k.nr) }
	if m*n*k < parallelFlops && best.name != "go" && len(others) > 0 {
		return others[smallPick(memo, others, m, n)]
	}
	if m >= 8*best.mr && n >= 8*best.nr {
		// best pads by at most 1/8 in each direction: (9/8)²·3/4 < 1, so
		// no sibling can win.
		return best
	}
	pick, pa := best, area(best)
	for _, k := range others {
		if k.name != best.name {
			continue
		}
		if a := area(k); 4*a < 3*pa {
			pick, pa = k, a
		}
	}
	return pick
}

// Gemm computes C = alpha·op(A)·op(B) + beta·C on row-major matrices, where
// op(A) is m×k (A itself when tA is false, Aᵀ when true), op(B) is k×n and C
// is m×n. lda, ldb and ldc are the row strides. When beta is 0, C is not
// read (it may hold NaN). It panics, as gonum does, on inconsistent sizes.
// The package doc states exactly how every element is rounded.
func Gemm[T Float](tA, tB bool, m, n, k int, alpha T, a []T, lda int, b []T, ldb int, beta T, c []T, ldc int) {
	gemmFlags(tA, tB, m, n, k, alpha, a, lda, b, ldb, beta, c, ldc, 0)
}

func gemmFlags[T Float](tA, tB bool, m, n, k int, alpha T, a []T, lda int, b []T, ldb int, beta T, c []T, ldc int, flags uintptr) {
	checkArgs(tA, tB, m, n, k, a, lda, b, ldb, c, ldc)
	if m == 0 || n == 0 {
		return
	}
	if alpha == 0 || k == 0 {
		scale(m, n, beta, c, ldc, flags)
		return
	}
	switch any(alpha).(type) {
	case float64:
		gemm(&pool64, choose(kernel64, others64, &memo64, m, n, k), tA, tB, m, n, k, any(alpha).(float64), any(a).([]float64), lda, any(b).([]float64), ldb, any(beta).(float64), any(c).([]float64), ldc, flags)
	case float32:
		gemm(&pool32, choose(kernel32, others32, &memo32, m, n, k), tA, tB, m, n, k, any(alpha).(float32), any(a).([]float32), lda, any(b).([]float32), ldb, any(beta).(float32), any(c).([]float32), ldc, flags)
	}
}

// scale sets C = beta·C (C = 0 when beta is 0, without reading C).
func scale[T Float](m, n int, beta T, c []T, ldc int, flags uintptr) {
	for i := range m {
		row := c[i*ldc : i*ldc+n]
		for j := range row {
			v := T(0)
			if beta != 0 {
				v = beta * row[j]
			}
			row[j] = v
		}
	}
}

// job is one product, cut into tiles that workers claim by counter.
type job[T Float] struct {
	k           microKernel[T]
	tA, tB      bool
	m, n, kk    int
	alpha, beta T
	a, b, c     []T
	lda, ldb    int
	ldc         int
	flags       uintptr
	direct      bool // small: read op(A) and op(B) in place where their layout allows
	tm, tn      int  // tile size
	tilesAcross int
	// span holds the tiles (or chunks) not yet claimed: the first in its
	// low 32 bits, one past the last in its high 32 bits (claim).
	span  atomic.Uint64
	busy  atomic.Int32 // helpers still running
	wg    sync.WaitGroup
	loop  Ranger // set while the pool runs a ParallelRange instead
	loopN int
	bad   atomic.Int64 // an Update's smallest non-finite index so far
}

// scratch is one goroutine's packing buffers.
type scratch[T Float] struct {
	a, b []T
	c    [genericMax]T // an edge block of C
}

func (s *scratch[T]) size(na, nb int) {
	if cap(s.a) < na {
		s.a = make([]T, na)
	}
	if cap(s.b) < nb {
		s.b = make([]T, nb)
	}
	s.a, s.b = s.a[:na], s.b[:nb]
}

// pool is a set of long-lived workers for one element type. One product at
// a time uses it; a second caller running at the same moment (a sweep
// training several networks, say) computes its product on its own
// goroutine, with scratch buffers from spare.
type pool[T Float] struct {
	mu      sync.Mutex
	wake    chan *scratch[T]
	started int
	own     scratch[T] // the caller's, while it holds mu
	j       job[T]
	spare   sync.Pool
}

var (
	pool64 = pool[float64]{wake: make(chan *scratch[float64], 256)}
	pool32 = pool[float32]{wake: make(chan *scratch[float32], 256)}
)

// plan chooses the tile size for procs goroutines: among tilings with
// tiles at most tileRows()×ncMax (rounded to whole blocks), the one with the
// least estimated time, counting waves of procs tiles, each costing its
// padded area plus its packing (16 multiply-adds per packed element is a
// judgement of the relative cost of a scalar copy and a vector FMA).
func plan(m, n, mr, nr, procs int) (tm, tn int) {
	cdiv := func(x, y int) int { return (x + y - 1) / y }
	up := func(x, y int) int { return cdiv(x, y) * y }
	m0, n0 := cdiv(m, tileRows()), cdiv(n, ncMax)
	if procs == 1 {
		// The fewest tiles: every tiling does the same work, and fewer
		// tiles pack less.
		return up(cdiv(m, m0), mr), up(cdiv(n, n0), nr)
	}
	best := -1
	for tM := m0; tM < m0+4 && tM <= cdiv(m, mr); tM++ {
		for tN := n0; tN < n0+4 && tN <= cdiv(n, nr); tN++ {
			rm, rn := up(cdiv(m, tM), mr), up(cdiv(n, tN), nr)
			tiles := cdiv(m, rm) * cdiv(n, rn)
			cost := cdiv(tiles, procs) * (rm*rn + 16*(rm+rn))
			if best < 0 || cost < best {
				best, tm, tn = cost, rm, rn
			}
		}
	}
	return tm, tn
}

func gemm[T Float](p *pool[T], mk microKernel[T], tA, tB bool, m, n, k int, alpha T, a []T, lda int, b []T, ldb int, beta T, c []T, ldc int, flags uintptr) {
	// runtime.GOMAXPROCS takes the scheduler's lock: not for small
	// products, which stay on this goroutine anyway.
	procs := 1
	if m*n*k >= parallelFlops {
		procs = runtime.GOMAXPROCS(0)
	}
	tm, tn := plan(m, n, mk.mr, mk.nr, procs)
	// A small product skips packing where an operand's layout lets the
	// strided kernel read it in place: packing costs about as much as the
	// arithmetic there, and buys no cache locality.
	direct := mk.fs != nil && m*n*k < parallelFlops
	across := (n + tn - 1) / tn
	tiles := ((m + tm - 1) / tm) * across
	if !p.mu.TryLock() {
		s, _ := p.spare.Get().(*scratch[T])
		if s == nil {
			s = new(scratch[T])
		}
		var j job[T]
		j.set(mk, tA, tB, m, n, k, alpha, a, lda, b, ldb, beta, c, ldc, flags, direct, tm, tn, across, tiles)
		j.run(s, true)
		p.spare.Put(s)
		return
	}
	defer p.mu.Unlock()
	j := &p.j
	j.set(mk, tA, tB, m, n, k, alpha, a, lda, b, ldb, beta, c, ldc, flags, direct, tm, tn, across, tiles)
	helpers := min(procs-1, tiles-1)
	if helpers > 0 {
		for p.started < helpers {
			p.start()
		}
		j.wg.Add(helpers)
		j.busy.Store(int32(helpers))
		for range helpers {
			p.wake <- nil
		}
	}
	j.run(&p.own, true)
	j.await()
	// Drop references so the pool does not keep the caller's buffers alive.
	j.a, j.b, j.c = nil, nil, nil
}

// await waits for the helpers of j. It polls briefly before parking in
// Wait, as the workers do (spinFor): the helpers usually finish their
// last tile within microseconds of the caller. Wait then returns at once,
// and orders their writes. With no helper left running it reads no
// clock: a small product, which has no helper, takes from a few hundred
// nanoseconds, and a clock read (about 60 on a virtual machine) is a
// visible part of that.
func (j *job[T]) await() {
	if j.busy.Load() > 0 {
		for t0 := time.Now(); j.busy.Load() > 0 && time.Since(t0) < spinFor; {
			runtime.Gosched()
		}
	}
	j.wg.Wait()
}

// start starts one worker. (A method, not a go statement in gemm: Go 1.26
// fails to compile a go statement with a generic receiver there.)
func (p *pool[T]) start() {
	s := new(scratch[T])
	go p.work(s)
	p.started++
}

// spinFor is how long a worker polls for the next product before it
// parks. A training step calls Gemm several times with a little
// elementwise work between (tens of microseconds); a parked worker takes
// microseconds to wake (a futex call on Linux), a polling one none.
const spinFor = 50 * time.Microsecond

func (p *pool[T]) work(s *scratch[T]) {
	for {
		if len(p.wake) == 0 {
			for t0 := time.Now(); len(p.wake) == 0 && time.Since(t0) < spinFor; {
				runtime.Gosched()
			}
		}
		if _, ok := <-p.wake; !ok {
			return
		}
		if p.j.loop != nil {
			p.j.runLoop(false)
		} else {
			p.j.run(s, false)
		}
		p.j.busy.Add(-1)
		p.j.wg.Done()
	}
}

func (j *job[T]) set(mk microKernel[T], tA, tB bool, m, n, k int, alpha T, a []T, lda int, b []T, ldb int, beta T, c []T, ldc int, flags uintptr, direct bool, tm, tn, across, tiles int) {
	j.k = mk
	j.tA, j.tB, j.m, j.n, j.kk = tA, tB, m, n, k
	j.alpha, j.beta = alpha, beta
	j.a, j.b, j.c = a, b, c
	j.lda, j.ldb, j.ldc = lda, ldb, ldc
	j.flags = flags
	j.direct = direct
	j.tm, j.tn = tm, tn
	j.tilesAcross = across
	j.span.Store(uint64(tiles) << 32)
}

// claim takes the next tile (or chunk) not yet claimed, and reports
// false when none is left. The caller of a product takes them from the
// front and the workers from the back, so each ends up with a contiguous
// run: with two cores, one half of a matrix each. Consecutive products
// and updates then split the same memory the same way, and each core
// finds in its own cache what it wrote a moment before (a weight matrix
// updated half by each core, then read by the next product's tiles
// interleaved, had to move between the cores' caches).
func (j *job[T]) claim(front bool) (int, bool) {
	for {
		v := j.span.Load()
		lo, hi := v&0xffffffff, v>>32
		if lo >= hi {
			return 0, false
		}
		t, nv := lo, hi<<32|(lo+1)
		if !front {
			t, nv = hi-1, (hi-1)<<32|lo
		}
		if j.span.CompareAndSwap(v, nv) {
			return int(t), true
		}
	}
}

// run claims tiles until none are left.
func (j *job[T]) run(s *scratch[T], front bool) {
	for {
		t, ok := j.claim(front)
		if !ok {
			return
		}
		i0 := t / j.tilesAcross * j.tm
		j0 := t % j.tilesAcross * j.tn
		j.tile(s, i0, min(j.tm, j.m-i0), j0, min(j.tn, j.n-j0))
	}
}

// tile computes the rows×cols tile of C at (i0, j0).
//
// With j.direct, an operand whose panels are already strided runs in
// memory (op(A) = Aᵀ: step l of rows i0… is A[l, i0…]; op(B) = B: step l
// of columns j0… is B[l, j0…]) and that the tile covers in whole blocks is
// not packed: the strided kernel reads it in place. Both kernels compute
// the same sums in the same order, so C's bits do not change.
func (j *job[T]) tile(s *scratch[T], i0, rows, j0, cols int) {
	mr, nr, fn, fs := j.k.mr, j.k.nr, j.k.fn, j.k.fs
	pa, pb := (rows+mr-1)/mr, (cols+nr-1)/nr
	directA := j.direct && j.tA && rows%mr == 0
	directB := j.direct && !j.tB && cols%nr == 0
	kc0 := min(kcBlock, j.kk)
	s.size(pa*mr*kc0, pb*nr*kc0)
	c := j.c
	for pc := 0; pc < j.kk; pc += kcBlock {
		kc := min(kcBlock, j.kk-pc)
		if !directB {
			pack(s.b[:pb*nr*kc], j.b, j.ldb, !j.tB, j0, cols, pc, kc, nr)
		}
		if !directA {
			pack(s.a[:pa*mr*kc], j.a, j.lda, j.tA, i0, rows, pc, kc, mr)
		}
		beta, flags := j.beta, uintptr(0)
		if pc > 0 {
			beta = 1
		} else if beta == 0 {
			flags |= flagNoBeta
		}
		for q := range pb {
			cj := j0 + q*nr
			nc := min(nr, cols-q*nr)
			bp, ldb := &s.b[0], nr
			if directB {
				bp, ldb = &j.b[pc*j.ldb+cj], j.ldb
			} else {
				bp = &s.b[q*nr*kc]
			}
			for p := range pa {
				ci := i0 + p*mr
				nrow := min(mr, rows-p*mr)
				ap, lda := &s.a[0], mr
				if directA {
					ap, lda = &j.a[pc*j.lda+ci], j.lda
				} else {
					ap = &s.a[p*mr*kc]
				}
				if nrow == mr && nc == nr {
					if j.direct {
						fs(kc, ap, bp, &c[ci*j.ldc+cj], j.ldc, j.alpha, beta, flags, lda, ldb)
					} else {
						fn(kc, ap, bp, &c[ci*j.ldc+cj], j.ldc, j.alpha, beta, flags)
					}
					continue
				}
				// An edge block: compute it whole in s.c, with the same
				// kernel (so with the same rounding), and copy out the
				// part that belongs to C.
				e := s.c[:mr*nr]
				if flags&flagNoBeta == 0 {
					for r := range nrow {
						copy(e[r*nr:r*nr+nc], c[(ci+r)*j.ldc+cj:])
					}
				}
				if j.direct {
					fs(kc, ap, bp, &e[0], nr, j.alpha, beta, flags, lda, ldb)
				} else {
					fn(kc, ap, bp, &e[0], nr, j.alpha, beta, flags)
				}
				for r := range nrow {
					copy(c[(ci+r)*j.ldc+cj:(ci+r)*j.ldc+cj+nc], e[r*nr:])
				}
			}
		}
	}
}

// pack copies a block of a matrix into panels for a micro-kernel: the
// elements X[i, l] for i in [i0, i0+rows) and l in [pc, pc+kc), where X is
// x itself (ld its row stride) when trans is false and xᵀ when true,
// grouped in panels of w consecutive i, each panel stored l-major (w values
// per step l) and zero-padded to w. With trans false it packs op(A) for
// A not transposed; op(B) for B not transposed is the same as packing Bᵀ
// transposed, hence the call with !tB.
func pack[T Float](dst, x []T, ld int, trans bool, i0, rows, pc, kc, w int) {
	for p := 0; p*w < rows; p++ {
		panel := dst[p*w*kc : (p+1)*w*kc]
		n := min(w, rows-p*w)
		if trans {
			// X[i, l] = x[l, i]: each step is a contiguous run of x.
			base := pc*ld + i0 + p*w
			if n == w && copyRuns(panel, x[base:], ld, kc, w) {
				continue
			}
			for l := range kc {
				d := panel[l*w : l*w+w]
				copy(d[:n], x[base+l*ld:base+l*ld+n])
				clear(d[n:])
			}
			continue
		}
		// X[i, l] = x[i, l]: each row of x is contiguous. Square blocks
		// of tb rows and tb steps are transposed in registers, tb rows at
		// a time over all kc steps, so that the reads form tb streams
		// that the hardware prefetches; what is left over (rows or steps
		// fewer than tb) is copied element by element.
		if n < w {
			clear(panel)
		}
		done := 0
		for _, tb := range transposeBlocks[T]() {
			for ; done+tb <= n; done += tb {
				off := (i0+p*w+done)*ld + pc
				l := kc / tb * tb
				transposeRun(x[off:], ld, panel[done:], w, tb, kc/tb)
				for r := range tb {
					src := x[off+r*ld+l : off+r*ld+kc]
					for ll, v := range src {
						panel[(l+ll)*w+done+r] = v
					}
				}
			}
		}
		for r := done; r < n; r++ {
			off := (i0+p*w+r)*ld + pc
			for l, v := range x[off : off+kc] {
				panel[l*w+r] = v
			}
		}
	}
}

// copyRuns copies kc runs of w elements, run l from src[l·ld:], to
// dst[l·w:], as fixed-size array moves (which the compiler turns into a
// few vector moves) for the block widths of the kernels; it reports false,
// copying nothing, for other widths.
func copyRuns[T Float](dst, src []T, ld, kc, w int) bool {
	switch w {
	case 4:
		for l := range kc {
			*(*[4]T)(dst[l*4 : l*4+4]) = *(*[4]T)(src[l*ld : l*ld+4])
		}
	case 6:
		for l := range kc {
			*(*[6]T)(dst[l*6 : l*6+6]) = *(*[6]T)(src[l*ld : l*ld+6])
		}
	case 8:
		for l := range kc {
			*(*[8]T)(dst[l*8 : l*8+8]) = *(*[8]T)(src[l*ld : l*ld+8])
		}
	case 12:
		for l := range kc {
			*(*[12]T)(dst[l*12 : l*12+12]) = *(*[12]T)(src[l*ld : l*ld+12])
		}
	case 16:
		for l := range kc {
			*(*[16]T)(dst[l*16 : l*16+16]) = *(*[16]T)(src[l*ld : l*ld+16])
		}
	case 24:
		for l := range kc {
			*(*[24]T)(dst[l*24 : l*24+24]) = *(*[24]T)(src[l*ld : l*ld+24])
		}
	case 32:
		for l := range kc {
			*(*[32]T)(dst[l*32 : l*32+32]) = *(*[32]T)(src[l*ld : l*ld+32])
		}
	case 48:
		for l := range kc {
			*(*[48]T)(dst[l*48 : l*48+48]) = *(*[48]T)(src[l*ld : l*ld+48])
		}
	default:
		return false
	}
	return true
}

// transposeBlocks lists the sides of the square blocks pack transposes in
// registers, largest first: 8 and 4 for float32 (256- and 128-bit
// registers), 4 for float64; none without assembly.
func transposeBlocks[T Float]() []int {
	if !useTranspose {
		return nil
	}
	var z T
	if _, ok := any(z).(float32); ok {
		return blocks32
	}
	return blocks64
}

var blocks32, blocks64 = []int{8, 4}, []int{4}

// transposeRun transposes nb side-by-side tb×tb blocks: block q, at
// src[q·tb:] (row stride lds), to dst[q·tb·ldd:] (row stride ldd). The
// bounds are checked once for the whole run, and one assembly call does
// every block: per 4×4 block, a call costs as much as the transpose.
func transposeRun[T Float](src []T, lds int, dst []T, ldd, tb, nb int) {
	if nb == 0 {
		return
	}
	switch s := any(src).(type) {
	case []float32:
		d := any(dst).([]float32)
		_, _ = s[(tb-1)*lds+nb*tb-1], d[(nb*tb-1)*ldd+tb-1] // bounds, checked once
		if tb == 8 {
			transpose8x8F32(&s[0], lds, &d[0], ldd, nb)
		} else {
			transpose4x4F32(&s[0], lds, &d[0], ldd, nb)
		}
	case []float64:
		d := any(dst).([]float64)
		_, _ = s[3*lds+nb*4-1], d[(nb*4-1)*ldd+3]
		transpose4x4F64(&s[0], lds, &d[0], ldd, nb)
	}
}

// checkArgs panics on arguments gonum would reject for the whole product,
// before any tile reaches a worker: a panic there could not be recovered
// by the caller. The length formulas are gonum's (blas/gonum/dgemm.go).
func checkArgs[T Float](tA, tB bool, m, n, k int, a []T, lda int, b []T, ldb int, c []T, ldc int) {
	rowsA, colsA := m, k
	if tA {
		rowsA, colsA = k, m
	}
	rowsB, colsB := k, n
	if tB {
		rowsB, colsB = n, k
	}
	switch {
	case m < 0 || n < 0 || k < 0:
		panic("kern: negative dimension")
	case lda < max(1, colsA):
		panic("kern: bad lda")
	case ldb < max(1, colsB):
		panic("kern: bad ldb")
	case ldc < max(1, n):
		panic("kern: bad ldc")
	}
	if m == 0 || n == 0 {
		return
	}
	if len(a) < (rowsA-1)*lda+colsA {
		panic("kern: A is too short")
	}
	if len(b) < (rowsB-1)*ldb+colsB {
		panic("kern: B is too short")
	}
	if len(c) < (m-1)*ldc+n {
		panic("kern: C is too short")
	}
}
