package kern

import (
	"runtime"
	"time"
)

const (
	// updateParallel is the length from which Update spreads over the
	// workers: 2^15 elements take about 15 µs on one core (a few
	// nanoseconds each, memory-bound), ten times the cost of waking a
	// worker. A training step's large weight matrices (hundreds of
	// thousands of elements) are above it; biases and small layers stay
	// on the caller's goroutine.
	updateParallel = 1 << 15
	// updateChunk is the number of elements a worker claims at a time:
	// small enough that two workers share a matrix evenly, large enough
	// that claiming (one atomic add) costs nothing beside the arithmetic.
	updateChunk = 1 << 13
)

// Update applies one plain or momentum SGD step to every element j of val,
// in float64 and in this order (the same expressions, so the same bits, as
// a serial loop over j):
//
//	θ = val[j];  g = grad[j] + decay2·θ
//	without vel:  θ = θ − lr·g            (written θ −= lr·(grad[j] + decay2·θ))
//	with vel:     v = mu·vel[j] + g;  vel[j] = T(v)
//	              g = v (heavy ball), or g + mu·v (nesterov)
//	              θ = θ − lr·g
//	val[j] = T(θ)
//
// It returns the smallest j whose new val[j] is not finite, or −1; every
// element is updated either way, so that the caller can restore the old
// values or report the place. Elements are independent, so splitting
// val into contiguous chunks for the workers (from updateParallel
// elements on, when GOMAXPROCS > 1) changes neither the values nor the
// index: Update gives the same bits for any GOMAXPROCS. grad and vel (when
// not nil) must be at least as long as val. It allocates nothing.
func Update[T Float](val, grad, vel []T, lr, decay2, mu float64, nesterov bool) (bad int) {
	grad = grad[:len(val)]
	if vel != nil {
		vel = vel[:len(val)]
	}
	if len(val) < updateParallel {
		return updateRange(val, grad, vel, lr, decay2, mu, nesterov)
	}
	switch v := any(val).(type) {
	case []float64:
		return updateOn(&pool64, v, any(grad).([]float64), any(vel).([]float64), lr, decay2, mu, nesterov)
	case []float32:
		return updateOn(&pool32, v, any(grad).([]float32), any(vel).([]float32), lr, decay2, mu, nesterov)
	}
	return -1
}

// updateRange is the serial loop, one per variant so that the common cases
// run without per-element branches.
func updateRange[T Float](val, grad, vel []T, lr, d, mu float64, nesterov bool) int {
	bad := -1
	grad = grad[:len(val)]
	switch {
	case vel == nil:
		for j, gj := range grad {
			theta := float64(val[j])
			theta -= lr * (float64(gj) + d*theta)
			nv := T(theta)
			if nv-nv != 0 && bad < 0 {
				bad = j
			}
			val[j] = nv
		}
	case nesterov:
		vel = vel[:len(val)]
		for j, gj := range grad {
			theta := float64(val[j])
			g := float64(gj) + d*theta
			vj := mu*float64(vel[j]) + g
			vel[j] = T(vj)
			g += mu * vj
			theta -= lr * g
			nv := T(theta)
			if nv-nv != 0 && bad < 0 {
				bad = j
			}
			val[j] = nv
		}
	default:
		vel = vel[:len(val)]
		for j, gj := range grad {
			theta := float64(val[j])
			g := float64(gj) + d*theta
			vj := mu*float64(vel[j]) + g
			vel[j] = T(vj)
			g = vj
			theta -= lr * g
			nv := T(theta)
			if nv-nv != 0 && bad < 0 {
				bad = j
			}
			val[j] = nv
		}
	}
	return bad
}

// updateOn runs a large Update on p's workers, as gemm runs a product:
// the caller takes a chunk like any worker, and a second caller at the
// same moment computes on its own goroutine.
func updateOn[T Float](p *pool[T], val, grad, vel []T, lr, d, mu float64, nesterov bool) int {
	procs := runtime.GOMAXPROCS(0)
	if procs < 2 || !p.mu.TryLock() {
		return updateRange(val, grad, vel, lr, d, mu, nesterov)
	}
	defer p.mu.Unlock()
	j := &p.j
	chunks := (len(val) + updateChunk - 1) / updateChunk
	j.upd = updateJob[T]{val: val, grad: grad, vel: vel, lr: lr, d: d, mu: mu, nesterov: nesterov, on: true}
	j.tiles = int64(chunks)
	j.next.Store(0)
	j.bad.Store(int64(len(val)))
	helpers := min(procs-1, chunks-1)
	for p.started < helpers {
		p.start()
	}
	j.wg.Add(helpers)
	j.busy.Store(int32(helpers))
	for range helpers {
		p.wake <- nil
	}
	j.runUpdate()
	for t0 := time.Now(); j.busy.Load() > 0 && time.Since(t0) < spinFor; {
		runtime.Gosched()
	}
	j.wg.Wait()
	j.upd = updateJob[T]{}
	if b := int(j.bad.Load()); b < len(val) {
		return b
	}
	return -1
}

// updateJob is an Update in progress: the job's counter hands out chunks.
type updateJob[T Float] struct {
	val, grad, vel []T
	lr, d, mu      float64
	nesterov       bool
	on             bool // the job is an Update, not a product
}

// runUpdate claims chunks until none are left, lowering j.bad to the
// smallest non-finite index found: a minimum, so the answer does not
// depend on which worker took which chunk.
func (j *job[T]) runUpdate() {
	u := &j.upd
	for {
		t := j.next.Add(1) - 1
		if t >= j.tiles {
			return
		}
		lo := int(t) * updateChunk
		hi := min(lo+updateChunk, len(u.val))
		var vel []T
		if u.vel != nil {
			vel = u.vel[lo:hi]
		}
		if b := updateRange(u.val[lo:hi], u.grad[lo:hi], vel, u.lr, u.d, u.mu, u.nesterov); b >= 0 {
			for b64 := int64(lo + b); ; {
				cur := j.bad.Load()
				if b64 >= cur || j.bad.CompareAndSwap(cur, b64) {
					break
				}
			}
		}
	}
}
