// Package kern is the one seam through which every matrix product in rhomb
// passes. Layers call Gemm and nothing else, so that a faster kernel can
// replace the body of this package without touching a layer.
//
// Today the products are computed by gonum's pure-Go BLAS (blas/gonum). Gonum
// parallelizes large products itself, but it starts goroutines and allocates
// on every call; rhomb's training step must allocate nothing after warm-up.
// So Gemm cuts C into tiles small enough that gonum computes each one
// serially, and spreads the tiles over a fixed pool of workers that live for
// the whole process.
//
// Determinism: tiles split only the rows and columns of C, never the inner
// dimension k, and gonum sums each element of C over k in a fixed order. An
// element's value therefore does not depend on the tiling, on which worker
// computed it, or on GOMAXPROCS: the same inputs give the same bits.
package kern

import (
	"runtime"
	"sync"
	"sync/atomic"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/gonum"
)

// Float is the set of element types rhomb computes in.
type Float interface{ float32 | float64 }

// Tile sizes. Gonum's Dgemm/Sgemm go parallel (and allocate) when C spans
// four or more of its 64×64 blocks (blas/gonum/gonum.go: blockSize = 64,
// minParBlock = 4); a 64×192 tile spans three, so gonum runs it serially.
const (
	tileRows = 64
	tileCols = 192
	// parallelFlops is the size of product below which tiles stay on the
	// caller's goroutine. 2^18 multiply-adds take tens of microseconds, well
	// above a goroutine wake-up (about a microsecond); the value is a
	// judgement, not yet a measurement, and the faster kernels should
	// measure it.
	parallelFlops = 1 << 18
)

// Gemm computes C = alpha·op(A)·op(B) + beta·C on row-major matrices, where
// op(A) is m×k (A itself when tA is false, Aᵀ when true), op(B) is k×n and C
// is m×n. lda, ldb and ldc are the row strides. It panics, as gonum does, on
// inconsistent sizes.
func Gemm[T Float](tA, tB bool, m, n, k int, alpha T, a []T, lda int, b []T, ldb int, beta T, c []T, ldc int) {
	checkArgs(tA, tB, m, n, k, a, lda, b, ldb, c, ldc)
	if m == 0 || n == 0 {
		return
	}
	switch any(alpha).(type) {
	case float64:
		gemm(&pool64, tA, tB, m, n, k, any(alpha).(float64), any(a).([]float64), lda, any(b).([]float64), ldb, any(beta).(float64), any(c).([]float64), ldc)
	case float32:
		gemm(&pool32, tA, tB, m, n, k, any(alpha).(float32), any(a).([]float32), lda, any(b).([]float32), ldb, any(beta).(float32), any(c).([]float32), ldc)
	}
}

// job is one product, cut into tiles that workers claim by counter.
type job[T Float] struct {
	tA, tB       bool
	m, n, k      int
	alpha, beta  T
	a, b, c      []T
	lda, ldb     int
	ldc          int
	tilesAcross  int
	tiles        int64
	next         atomic.Int64
	wg           sync.WaitGroup
	concurrently bool
}

// pool is a set of long-lived workers for one element type. One product at
// a time uses it; a second caller running at the same moment (a sweep
// training several networks, say) computes its product on its own goroutine.
type pool[T Float] struct {
	mu      sync.Mutex
	wake    chan struct{}
	started int
	j       job[T]
}

var (
	pool64 = pool[float64]{wake: make(chan struct{}, 256)}
	pool32 = pool[float32]{wake: make(chan struct{}, 256)}
)

func gemm[T Float](p *pool[T], tA, tB bool, m, n, k int, alpha T, a []T, lda int, b []T, ldb int, beta T, c []T, ldc int) {
	procs := runtime.GOMAXPROCS(0)
	across := (n + tileCols - 1) / tileCols
	tiles := ((m + tileRows - 1) / tileRows) * across
	if procs < 2 || tiles < 2 || m*n*k < parallelFlops || !p.mu.TryLock() {
		var j job[T]
		j.set(tA, tB, m, n, k, alpha, a, lda, b, ldb, beta, c, ldc, across, tiles)
		j.run()
		return
	}
	defer p.mu.Unlock()
	helpers := min(procs-1, tiles-1)
	for p.started < helpers {
		go p.work()
		p.started++
	}
	j := &p.j
	j.set(tA, tB, m, n, k, alpha, a, lda, b, ldb, beta, c, ldc, across, tiles)
	j.wg.Add(helpers)
	for range helpers {
		p.wake <- struct{}{}
	}
	j.run()
	j.wg.Wait()
	// Drop references so the pool does not keep the caller's buffers alive.
	j.a, j.b, j.c = nil, nil, nil
}

func (p *pool[T]) work() {
	for range p.wake {
		p.j.run()
		p.j.wg.Done()
	}
}

func (j *job[T]) set(tA, tB bool, m, n, k int, alpha T, a []T, lda int, b []T, ldb int, beta T, c []T, ldc int, across, tiles int) {
	j.tA, j.tB, j.m, j.n, j.k = tA, tB, m, n, k
	j.alpha, j.beta = alpha, beta
	j.a, j.b, j.c = a, b, c
	j.lda, j.ldb, j.ldc = lda, ldb, ldc
	j.tilesAcross, j.tiles = across, int64(tiles)
	j.next.Store(0)
}

// run claims tiles until none are left.
func (j *job[T]) run() {
	for {
		t := j.next.Add(1) - 1
		if t >= j.tiles {
			return
		}
		i0 := int(t) / j.tilesAcross * tileRows
		j0 := int(t) % j.tilesAcross * tileCols
		mi := min(tileRows, j.m-i0)
		nj := min(tileCols, j.n-j0)
		var a, b []T
		if j.tA {
			a = j.a[i0:]
		} else {
			a = j.a[i0*j.lda:]
		}
		if j.tB {
			b = j.b[j0*j.ldb:]
		} else {
			b = j.b[j0:]
		}
		serial(j.tA, j.tB, mi, nj, j.k, j.alpha, a, j.lda, b, j.ldb, j.beta, j.c[i0*j.ldc+j0:], j.ldc)
	}
}

var impl gonum.Implementation

func trans(t bool) blas.Transpose {
	if t {
		return blas.Trans
	}
	return blas.NoTrans
}

// serial hands one tile to gonum; tiles are small enough that gonum does
// not start goroutines of its own.
func serial[T Float](tA, tB bool, m, n, k int, alpha T, a []T, lda int, b []T, ldb int, beta T, c []T, ldc int) {
	switch any(alpha).(type) {
	case float64:
		impl.Dgemm(trans(tA), trans(tB), m, n, k, any(alpha).(float64), any(a).([]float64), lda, any(b).([]float64), ldb, any(beta).(float64), any(c).([]float64), ldc)
	case float32:
		impl.Sgemm(trans(tA), trans(tB), m, n, k, any(alpha).(float32), any(a).([]float32), lda, any(b).([]float32), ldb, any(beta).(float32), any(c).([]float32), ldc)
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
