package kern

import "runtime"

const (
	// updateParallel is the length from which ParallelRange spreads over the
	// workers: 2^15 elements take about 15 µs on one core (a few
	// nanoseconds each, memory-bound), ten times the cost of waking a
	// worker. A training step's large weight matrices (hundreds of
	// thousands of elements) are above it; biases and small layers stay
	// on the caller's goroutine.
	updateParallel = 1 << 15
	// updateChunk is the number of elements a worker claims at a time:
	// small enough that two workers share a matrix evenly, large enough
	// that claiming (one atomic add) costs nothing beside the arithmetic.
	updateChunk = RangeChunk
)

// RangeChunk is the grain of ParallelRange: every Range call it makes
// starts at a multiple of RangeChunk (or covers the whole range), so work
// keyed by fixed blocks that divide it (the trainer's noise streams) sees
// the same blocks whatever the split.
const RangeChunk = 1 << 13

// Ranger is elementwise work over [0, n) that splits into contiguous
// chunks: Range(lo, hi) does elements lo … hi−1 and returns the smallest
// index among them whose result is bad (a non-finite value, say), or −1.
// Chunks must not depend on one another.
type Ranger interface{ Range(lo, hi int) int }

// ParallelRange runs r over [0, n): on the caller's goroutine alone below
// updateParallel elements or when GOMAXPROCS is 1, otherwise in chunks of
// updateChunk elements spread over the workers (the caller takes chunks
// too). It returns the smallest index any chunk reported, or −1: a
// minimum, so the answer does not depend on which worker took which
// chunk, and since chunks are independent the results are the same bits
// for any GOMAXPROCS. It allocates nothing. The update rule of optim's
// trainer runs on it.
func ParallelRange(n int, r Ranger) int {
	if n < updateParallel {
		return r.Range(0, n)
	}
	return rangeOn(&pool64, n, r)
}

// rangeOn runs a large ParallelRange on p's workers, as gemm runs a
// product: the caller takes a chunk like any worker, and a second caller
// at the same moment computes on its own goroutine.
func rangeOn[T Float](p *pool[T], n int, r Ranger) int {
	procs := runtime.GOMAXPROCS(0)
	if procs < 2 || !p.mu.TryLock() {
		return r.Range(0, n)
	}
	defer p.mu.Unlock()
	j := &p.j
	chunks := (n + updateChunk - 1) / updateChunk
	j.loop, j.loopN = r, n
	j.span.Store(uint64(chunks) << 32)
	j.bad.Store(int64(n))
	helpers := min(procs-1, chunks-1)
	for p.started < helpers {
		p.start()
	}
	j.wg.Add(helpers)
	j.busy.Store(int32(helpers))
	for range helpers {
		p.wake <- nil
	}
	j.runLoop(true)
	j.await()
	j.loop = nil
	if b := int(j.bad.Load()); b < n {
		return b
	}
	return -1
}

// runLoop claims chunks until none are left, lowering j.bad to the
// smallest bad index found.
func (j *job[T]) runLoop(front bool) {
	for {
		t, ok := j.claim(front)
		if !ok {
			return
		}
		lo := t * updateChunk
		hi := min(lo+updateChunk, j.loopN)
		if b := j.loop.Range(lo, hi); b >= 0 {
			for b64 := int64(b); ; {
				cur := j.bad.Load()
				if b64 >= cur || j.bad.CompareAndSwap(cur, b64) {
					break
				}
			}
		}
	}
}
