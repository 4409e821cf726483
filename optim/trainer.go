package optim

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"sync/atomic"
	"time"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/internal/kern"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net"
)

// Model is what the trainer trains: a *net.Network, or a wrapper around one
// such as *normalize.Net, whose trainable parameters may differ from the
// network's weights.
type Model[T net.Float] interface {
	Forward(x []T, rows int) []T
	Backward(dOut []T)
	Params() []*net.Param[T]
	// Base is the network that computes; its dense layers' W and gradients
	// are what the hooks observe.
	Base() *net.Network[T]
}

// Constrained is implemented by models with constraints to restore after
// every update (normalize.Net returns its directions to the sphere).
type Constrained interface{ Constrain() }

// Synced is implemented by models whose base network's weights are
// derived from their own parameters (normalize.Net: W = ρ·V). The trainer
// keeps them current: Constrain brings them up to date after every
// update. Code that writes parameter values itself calls Resync (or
// SetParams) afterwards.
type Synced interface{ Sync() }

// Resync brings m's derived weights up to date with its parameters, for a
// model that has any (Synced); it is a no-op for a plain network.
func Resync[T net.Float](m Model[T]) {
	if s, ok := m.(Synced); ok {
		s.Sync()
	}
}

// SetParams copies values into m's parameters, in Params order, and
// brings its derived weights up to date.
func SetParams[T net.Float](m Model[T], values [][]T) {
	for i, p := range m.Params() {
		copy(p.Value, values[i])
	}
	Resync(m)
}

// baseRho returns ρ of the model's current weights.
func (t *Trainer[T]) baseRho() float64 { return t.model.Base().Rho() }

// directionNormer is implemented by models that hold directions of their
// own, whose norms the hooks report.
type directionNormer interface {
	DirectionNorms(dst []float64) []float64
}

// Status says why a run ended.
type Status int

const (
	Finished  Status = iota // Settings.Epochs epochs were run
	Converged               // the epoch loss reached Settings.TargetLoss
	Stopped                 // a hook returned ErrStop
	Canceled                // the context was canceled
	Failed                  // an error ended the run
)

func (s Status) String() string {
	switch s {
	case Finished:
		return "finished"
	case Converged:
		return "converged"
	case Stopped:
		return "stopped"
	case Canceled:
		return "canceled"
	case Failed:
		return "failed"
	}
	return fmt.Sprintf("Status(%d)", int(s))
}

// Result summarizes a run.
type Result struct {
	Status Status
	Epochs int     // epochs completed
	Steps  int     // steps taken
	Loss   float64 // mean data loss of the last completed epoch; NaN if none
}

// NonFiniteError reports a loss, gradient or updated weight that is NaN or
// infinite. The model keeps the weights from before the failing step.
type NonFiniteError struct {
	Step  int    // the failing step, counting from 1
	Epoch int    // from 0
	What  string // "loss", or "gradient of <param>" or "update of <param>"
	Index int    // position in the parameter; -1 for the loss
	Value float64
}

func (e *NonFiniteError) Error() string {
	where := ""
	if e.Index >= 0 {
		where = fmt.Sprintf(" at index %d", e.Index)
	}
	return fmt.Sprintf("optim: step %d (epoch %d): %s is %v%s; the weights are those before the step. Lower the learning rate or the temperature, or standardize the inputs",
		e.Step, e.Epoch, e.What, e.Value, where)
}

// Trainer runs minibatch SGD on one model and dataset. It holds the state
// of the run — step and epoch counters, batch order, momentum, random
// streams — so that Run can be called again to continue.
type Trainer[T net.Float] struct {
	// guarded is the update pass of one parameter (kept here so that
	// handing it to the workers allocates nothing).
	guarded guardedUpdate[T]
	scales  []int8 // layerScales, for the hooks
	model   Model[T]
	loss    loss.Func[T]
	set     *data.Set[T]
	s       Settings
	params  []*net.Param[T]

	batch         int // rows per step
	stepsPerEpoch int
	order         []int // Shuffled: the current epoch's permutation
	inEpoch       int   // steps taken in the current epoch
	epochLoss     float64
	epochRows     int

	step, epoch int
	lastLoss    float64

	batchSrc, noiseSrc *rand.PCG
	batchRNG, noiseRNG *rand.Rand

	vel, saved, savedVel [][]T
	bx, by, gout, fnorm  []T

	info     StepInfo
	full     Margins
	einfo    EpochInfo
	dirNorms []float64
	started  time.Time
}

// NewTrainer checks the settings against the model and data and allocates
// every buffer the run needs.
func NewTrainer[T net.Float](m Model[T], l loss.Func[T], set *data.Set[T], s Settings) (*Trainer[T], error) {
	s = s.withDefaults()
	if err := s.validate(); err != nil {
		return nil, err
	}
	if err := set.Validate(); err != nil {
		return nil, err
	}
	base := m.Base()
	if set.Features != base.In() {
		return nil, fmt.Errorf("optim: the data has %d features but the network takes %d", set.Features, base.In())
	}
	if set.Outputs != base.Out() {
		return nil, fmt.Errorf("optim: the data has %d target columns but the network has %d outputs", set.Outputs, base.Out())
	}
	t := &Trainer[T]{model: m, loss: l, set: set, s: s, params: m.Params(), lastLoss: math.NaN()}
	t.batch = s.BatchSize
	if t.batch == 0 || t.batch > set.Rows {
		t.batch = set.Rows
	}
	t.stepsPerEpoch = (set.Rows + t.batch - 1) / t.batch
	t.order = make([]int, set.Rows)
	for i := range t.order {
		t.order[i] = i
	}
	// Two streams from one seed, so that noise does not shift batch order.
	t.batchSrc = rand.NewPCG(s.Seed, 0x62617463) // "batc"
	t.noiseSrc = rand.NewPCG(s.Seed, 0x6e6f6973) // "nois"
	t.batchRNG, t.noiseRNG = rand.New(t.batchSrc), rand.New(t.noiseSrc)
	for _, p := range t.params {
		if s.Momentum > 0 {
			t.vel = append(t.vel, make([]T, len(p.Value)))
			t.savedVel = append(t.savedVel, make([]T, len(p.Value)))
		}
		t.saved = append(t.saved, make([]T, len(p.Value)))
	}
	if t.batch < set.Rows || s.Sampling == Independent {
		t.bx = make([]T, t.batch*set.Features)
		t.by = make([]T, t.batch*set.Outputs)
	}
	t.gout = make([]T, t.batch*set.Outputs)
	t.fnorm = make([]T, t.batch*set.Outputs)
	L := len(base.Dense())
	t.info.LayerRho = make([]float64, L)
	t.info.DirNorm = make([]float64, L)
	t.info.DirSpeed = make([]float64, L)
	t.info.Nu = make([]float64, L)
	t.dirNorms = make([]float64, 0, L)
	return t, nil
}

// Run trains until Settings.Epochs epochs are complete (counting epochs of
// earlier calls), the target loss is reached, a hook stops it, or ctx is
// canceled. Cancellation takes effect at the next step boundary: the
// weights are those after the last whole step, and Run returns ctx.Err().
func (t *Trainer[T]) Run(ctx context.Context) (Result, error) {
	t.started = time.Now()
	// Parameters written before the run (a restored checkpoint, copied
	// weights) take effect: derived weights are brought up to date once;
	// after that every update keeps them current.
	Resync(t.model)
	for t.epoch < t.s.Epochs {
		for t.inEpoch < t.stepsPerEpoch {
			if err := ctx.Err(); err != nil {
				return t.result(Canceled), err
			}
			if err := t.takeStep(); err != nil {
				if errors.Is(err, ErrStop) {
					return t.result(Stopped), nil
				}
				return t.result(Failed), err
			}
		}
		status, err := t.endEpoch()
		if err != nil {
			if errors.Is(err, ErrStop) {
				return t.result(Stopped), nil
			}
			return t.result(Failed), err
		}
		if status == Converged {
			return t.result(Converged), nil
		}
	}
	return t.result(Finished), nil
}

func (t *Trainer[T]) result(s Status) Result {
	return Result{Status: s, Epochs: t.epoch, Steps: t.step, Loss: t.lastLoss}
}

func (t *Trainer[T]) endEpoch() (Status, error) {
	t.lastLoss = t.epochLoss / float64(t.epochRows)
	t.epoch++
	t.inEpoch, t.epochLoss, t.epochRows = 0, 0, 0
	if h := t.s.Hooks; h != nil && h.Epoch != nil {
		t.einfo = EpochInfo{Epoch: t.epoch - 1, Steps: t.step, Loss: t.lastLoss, Rho: t.baseRho(), Elapsed: time.Since(t.started)}
		if h.EpochMargins {
			t.fullMargins()
			t.einfo.Full = &t.full
		}
		if err := h.Epoch(&t.einfo); err != nil {
			return Failed, err
		}
	}
	if t.s.TargetLoss > 0 && t.lastLoss <= t.s.TargetLoss {
		return Converged, nil
	}
	return Finished, nil
}

// nextBatch returns the rows of the next step.
func (t *Trainer[T]) nextBatch() (x, y []T, rows int) {
	set := t.set
	if t.batch == set.Rows && t.s.Sampling == Shuffled {
		return set.X, set.Y, set.Rows
	}
	rows = t.batch
	if t.s.Sampling == Shuffled {
		if t.inEpoch == 0 {
			for i := len(t.order) - 1; i > 0; i-- { // Fisher–Yates
				j := t.batchRNG.IntN(i + 1)
				t.order[i], t.order[j] = t.order[j], t.order[i]
			}
		}
		start := t.inEpoch * t.batch
		rows = min(t.batch, set.Rows-start)
		for r, i := range t.order[start : start+rows] {
			t.gather(r, i)
		}
	} else {
		for r := range rows {
			t.gather(r, t.batchRNG.IntN(set.Rows))
		}
	}
	return t.bx, t.by, rows
}

func (t *Trainer[T]) gather(r, i int) {
	f, o := t.set.Features, t.set.Outputs
	copy(t.bx[r*f:(r+1)*f], t.set.X[i*f:(i+1)*f])
	copy(t.by[r*o:(r+1)*o], t.set.Y[i*o:(i+1)*o])
}

// takeStep takes one SGD step, leaving the end of an epoch to Run. After
// the first step it allocates nothing.
func (t *Trainer[T]) takeStep() error {
	lr := t.s.LearningRate * t.s.Schedule.Factor(Progress{
		Step: t.step, Epoch: t.epoch, StepsPerEpoch: t.stepsPerEpoch, Steps: t.stepsPerEpoch * t.s.Epochs,
	})
	x, y, rows := t.nextBatch()
	cols := t.set.Outputs
	SetTraining(t.model, true) // batch statistics for this step's pass only (see mode.go)
	out := t.model.Forward(x, rows)
	SetTraining(t.model, false)
	l := t.loss.Eval(out, y, rows, cols, t.gout[:rows*cols])
	if math.IsNaN(l) || math.IsInf(l, 0) {
		return &NonFiniteError{Step: t.step + 1, Epoch: t.epoch, What: "loss", Index: -1, Value: l}
	}
	t.model.Backward(t.gout[:rows*cols])
	h := t.s.Hooks
	if h != nil && h.Step != nil {
		t.observe(out, y, rows, l, lr)
	}
	if err := t.update(lr); err != nil {
		return err
	}
	if c, ok := t.model.(Constrained); ok {
		c.Constrain()
	}
	t.step++
	t.inEpoch++
	t.epochLoss += l * float64(rows)
	t.epochRows += rows
	if h != nil && h.Step != nil {
		t.info.Step = t.step
		t.info.Full = nil
		if h.FullMarginsEvery > 0 && t.step%h.FullMarginsEvery == 0 {
			t.fullMargins()
			t.info.Full = &t.full
		}
		if err := h.Step(&t.info); err != nil {
			return err
		}
	}
	return nil
}

// update applies one step to every parameter: decay, momentum, the step
// and the noise, in one pass per parameter. If any gradient or new value is
// not finite it restores the weights and momentum from before the step.
func (t *Trainer[T]) update(lr float64) error {
	decay2 := 2 * t.s.WeightDecay
	mu := t.s.Momentum
	sigma := math.Sqrt(2 * lr * t.s.Temperature)
	// One pass per parameter keeps the values (and velocities) for a
	// rollback and updates them, chunk by chunk on the workers of
	// internal/kern while the chunk is in cache, and finds a bad gradient
	// from the bad values it makes (guardedUpdate). The noise of a step
	// comes from one key drawn from the run's noise stream: each block of
	// each parameter has its own stream seeded from it, so the blocks can
	// be drawn on any worker in any order. A non-finite gradient anywhere
	// is reported before a non-finite update, and either error leaves
	// every parameter, velocity and stream as it was before the step.
	var key uint64
	noiseAt := *t.noiseSrc
	if sigma > 0 {
		key = t.noiseRNG.Uint64()
	}
	var bad *NonFiniteError
	done := len(t.params)
	for i, p := range t.params {
		d := 0.0
		if p.Decay {
			d = decay2
		}
		var v, sv []T
		if t.vel != nil {
			v, sv = t.vel[i], t.savedVel[i]
		}
		g := &t.guarded
		*g = guardedUpdate[T]{val: p.Value, grad: p.Grad, vel: v, saved: t.saved[i], savedVel: sv,
			step: exactUpdate[T]{lr: lr, d: d, mu: mu, nesterov: t.s.Nesterov}}
		if sigma > 0 {
			g.sigma, g.key, g.param = sigma, key, uint64(i)
		}
		g.gradBad.Store(int64(len(p.Value)))
		j := kern.ParallelRange(len(p.Value), g)
		gb := int(g.gradBad.Load())
		*g = guardedUpdate[T]{}
		if gb < len(p.Value) {
			bad = &NonFiniteError{Step: t.step + 1, Epoch: t.epoch, What: "gradient of " + p.Name, Index: gb, Value: float64(p.Grad[gb])}
			done = i + 1
			break
		}
		if j >= 0 && bad == nil {
			bad = &NonFiniteError{Step: t.step + 1, Epoch: t.epoch, What: "update of " + p.Name, Index: j, Value: float64(p.Value[j])}
		}
	}
	if bad != nil {
		for i, p := range t.params[:done] {
			copy(p.Value, t.saved[i])
			if t.vel != nil {
				copy(t.vel[i], t.savedVel[i])
			}
		}
		*t.noiseSrc = noiseAt
		Resync(t.model)
		return bad
	}
	return nil
}

// noiseBlock is the number of elements that share one noise seed in a
// step (noise.go). It divides kern.RangeChunk, so the blocks are the same
// however ParallelRange splits a parameter, and the bits do not depend on
// the number of threads.
const noiseBlock = kern.RangeChunk / 8

// guardedUpdate is one parameter's pass of Trainer.update, for
// kern.ParallelRange: per chunk, keep the values for a rollback, then
// step. gradBad holds the smallest index of a non-finite gradient
// (len(val) when none). The gradient is looked at only where the step
// made a value that is not finite: a non-finite gradient always makes one
// (θ − η·(NaN or ±Inf), also with η = 0, and adding noise keeps it), so a
// chunk whose new values are all finite had finite gradients, and the
// first bad gradient of a chunk is at or after its first bad value.
type guardedUpdate[T net.Float] struct {
	val, grad, vel  []T
	saved, savedVel []T
	step            exactUpdate[T]
	gradBad         atomic.Int64
	// With noise (sigma > 0): the step's key and the parameter's index.
	sigma      float64
	key, param uint64
}

// keep copies the values and velocities of [lo, hi) aside.
func (g *guardedUpdate[T]) keep(lo, hi int) {
	copy(g.saved[lo:hi], g.val[lo:hi])
	if g.vel != nil {
		copy(g.savedVel[lo:hi], g.vel[lo:hi])
	}
}

// blame lowers gradBad to the first non-finite gradient in [from, hi).
func (g *guardedUpdate[T]) blame(from, hi int) {
	j := firstNotFinite(g.grad[from:hi])
	if j < 0 {
		return
	}
	for b := int64(from + j); ; {
		cur := g.gradBad.Load()
		if b >= cur || g.gradBad.CompareAndSwap(cur, b) {
			return
		}
	}
}

func (g *guardedUpdate[T]) Range(lo, hi int) int {
	g.keep(lo, hi)
	var vel []T
	if g.vel != nil {
		vel = g.vel[lo:hi]
	}
	u := &g.step
	b := -1
	if g.sigma == 0 {
		b = stepExact(g.val[lo:hi], g.grad[lo:hi], vel, u.lr, u.d, u.mu, u.nesterov)
	} else {
		b = g.noisy(lo, hi, vel)
	}
	if b >= 0 {
		g.blame(lo+b, hi)
		return lo + b
	}
	return -1
}

// noisy steps [lo, hi) block by block: the noise-free step (stepExact),
// then σ times the block's standard normal numbers (fillNormals, seeded
// from (key, param, block)) added (addNoise), each rounded to T. It
// returns the first bad index relative to lo, or −1. lo is a multiple of
// noiseBlock (kern.RangeChunk).
func (g *guardedUpdate[T]) noisy(lo, hi int, vel []T) int {
	u := &g.step
	bad := -1
	var xi [noiseBlock]float64
	seed := splitMix(g.key ^ splitMix(g.param+1))
	for s := lo; s < hi; s += noiseBlock {
		e := min(s+noiseBlock, hi)
		k := s / noiseBlock
		var v []T
		if vel != nil {
			v = vel[s-lo : e-lo]
		}
		j := stepExact(g.val[s:e], g.grad[s:e], v, u.lr, u.d, u.mu, u.nesterov)
		fillNormals(xi[:e-s], splitMix(seed^uint64(k)))
		if jn := addNoise(g.val[s:e], xi[:e-s], g.sigma); jn >= 0 && (j < 0 || jn < j) {
			j = jn
		}
		if j >= 0 && bad < 0 {
			bad = s - lo + j
		}
	}
	return bad
}

// splitMix is the SplitMix64 output function (Steele, Lea & Flood,
// "Fast splittable pseudorandom number generators", OOPSLA 2014; constants
// from memory, checked against the published reference values in the
// test): it spreads nearby keys to unrelated 64-bit seeds.
func splitMix(x uint64) uint64 {
	x += 0x9e3779b97f4a7c15
	x = (x ^ x>>30) * 0xbf58476d1ce4e5b9
	x = (x ^ x>>27) * 0x94d049bb133111eb
	return x ^ x>>31
}

// The update loops. Each computes, per element and in float64,
//
//	g ← grad + d·θ;  v ← μv + g;  g ← v (heavy ball) or g + μv (Nesterov)
//	θ ← θ − ηg
//
// in that order, rounds θ (and v) to T, and, with noise, then adds σξ
// in float64 and rounds to T again (addNoise, guardedUpdate.noisy). The
// variants exist so that the common cases run without per-element
// branches; all run on the workers of internal/kern for large
// parameters, in independent chunks. Each returns the index of the first
// updated value that is not finite, or −1.

// ExactStep is the trainer's noise-free update of one parameter, for a
// program that runs its own loop (a benchmark, say): in float64 per
// element,
//
//	g = grad + decay2·θ;  with momentum: v = μv + g, g = v (heavy ball) or g + μv (Nesterov)
//	θ = θ − lr·g
//
// rounded to T. Large parameters are split into chunks that the workers of
// internal/kern share; chunks are independent, so the bits are those of
// one serial loop for any GOMAXPROCS. Keep one ExactStep and reuse it:
// Apply then allocates nothing.
type ExactStep[T net.Float] struct{ u exactUpdate[T] }

// Apply updates val (and vel, when not nil) in place and returns the
// smallest index whose new value is not finite, or −1; every element is
// updated either way.
func (s *ExactStep[T]) Apply(val, grad, vel []T, lr, decay2, mu float64, nesterov bool) int {
	s.u = exactUpdate[T]{val: val, grad: grad, vel: vel, lr: lr, d: decay2, mu: mu, nesterov: nesterov}
	j := kern.ParallelRange(len(val), &s.u)
	s.u = exactUpdate[T]{}
	return j
}

// exactUpdate is a noise-free step of one parameter, for
// kern.ParallelRange.
type exactUpdate[T net.Float] struct {
	val, grad, vel []T
	lr, d, mu      float64
	nesterov       bool
}

func (u *exactUpdate[T]) Range(lo, hi int) int {
	var vel []T
	if u.vel != nil {
		vel = u.vel[lo:hi]
	}
	if b := stepExact(u.val[lo:hi], u.grad[lo:hi], vel, u.lr, u.d, u.mu, u.nesterov); b >= 0 {
		return lo + b
	}
	return -1
}

// stepExact is the noise-free step: the vector loop of internal/kern
// (kern.SGDStep, the same operations in the same order, four elements at
// a time) where the processor has one, and stepScalar on the rest.
func stepExact[T net.Float](val, grad, vel []T, lr, d, mu float64, nesterov bool) int {
	done, nonFinite := kern.SGDStep(val, grad, vel, lr, d, mu, nesterov)
	var rest []T
	if vel != nil {
		rest = vel[done:]
	}
	bad := stepScalar(val[done:], grad[done:len(val)], rest, lr, d, mu, nesterov)
	if nonFinite {
		if j := firstNotFinite(val[:done]); j >= 0 {
			return j
		}
	}
	if bad >= 0 {
		return done + bad
	}
	return -1
}

// stepScalar is the noise-free step element by element, one variant per
// case so that the common ones run without per-element branches. Every
// product is wrapped in an explicit float64 conversion: the conversion
// rounds it, which forbids the compiler to fuse it into a multiply-add
// (the Go specification, "Floating-point operators"; amd64 builds with
// GOAMD64=v3 fuse otherwise), so the bits stay those of the vector loop
// on every build.
func stepScalar[T net.Float](val, grad, vel []T, lr, d, mu float64, nesterov bool) int {
	bad := -1
	grad = grad[:len(val)]
	switch {
	case vel == nil:
		for j, gj := range grad {
			theta := float64(val[j])
			theta -= float64(lr * (float64(gj) + float64(d*theta)))
			nv := T(theta)
			if notFinite(nv) && bad < 0 {
				bad = j
			}
			val[j] = nv
		}
	case nesterov:
		vel = vel[:len(val)]
		for j, gj := range grad {
			theta := float64(val[j])
			g := float64(gj) + float64(d*theta)
			vj := float64(mu*float64(vel[j])) + g
			vel[j] = T(vj)
			g += float64(mu * vj)
			theta -= float64(lr * g)
			nv := T(theta)
			if notFinite(nv) && bad < 0 {
				bad = j
			}
			val[j] = nv
		}
	default:
		vel = vel[:len(val)]
		for j, gj := range grad {
			theta := float64(val[j])
			g := float64(gj) + float64(d*theta)
			vj := float64(mu*float64(vel[j])) + g
			vel[j] = T(vj)
			g = vj
			theta -= float64(lr * g)
			nv := T(theta)
			if notFinite(nv) && bad < 0 {
				bad = j
			}
			val[j] = nv
		}
	}
	return bad
}

// observe fills t.info from the state before the update.
func (t *Trainer[T]) observe(out, y []T, rows int, dataLoss, lr float64) {
	info := &t.info
	info.Epoch, info.LearningRate, info.Temperature = t.epoch, lr, t.s.Temperature
	lambda := t.s.WeightDecay
	rho, gw := 1.0, 0.0
	for k, d := range t.model.Base().Dense() {
		w, g := d.W.Value, d.W.Grad
		var ww float64
		gw = 0
		for j := range w {
			ww += float64(w[j]) * float64(w[j])
			gw += float64(g[j]) * float64(w[j])
		}
		// ‖G − ⟨G, V⟩V‖ with ⟨G, V⟩V = (⟨G, W⟩/‖W‖²)·W, summed directly
		// rather than as ‖G‖² − ⟨G, V⟩², which cancels when G ∥ V.
		c := 0.0
		if ww > 0 {
			c = gw / ww
		}
		pt := 0.0
		for j := range w {
			e := float64(g[j]) - c*float64(w[j])
			pt += e * e
		}
		rk := math.Sqrt(ww)
		rho *= rk
		info.LayerRho[k] = rk
		info.Nu[k] = -gw / 2
		info.DirSpeed[k] = rk * math.Sqrt(pt)
	}
	info.Rho = rho
	if dn, ok := t.model.(directionNormer); ok {
		t.dirNorms = dn.DirectionNorms(t.dirNorms[:0])
		copy(info.DirNorm, t.dirNorms)
	} else {
		for k := range info.DirNorm {
			info.DirNorm[k] = 1
		}
	}
	// ⟨G_k, W_k⟩ is the same for every k (Euler); the readout's is used.
	t.scales = layerScales(t.model, t.scales[:0])
	info.RhoDot = rhoRate(gw, rho, info.LayerRho, t.scales, lambda)

	cols := t.set.Outputs
	info.Margins = Margins{}
	summarize(&info.Margins, out, y, rows, cols, rho)
	info.RhoStar = math.NaN()
	if eq, ok := t.loss.(loss.Equilibrium[T]); ok {
		f := t.fnorm[:rows*cols]
		for i, v := range out[:rows*cols] {
			f[i] = T(float64(v) / rho)
		}
		a, b := eq.Quadratic(f, y, rows, cols)
		info.RhoStar = RhoStar(a, b, lambda, t.scales)
	}

	decay := 0.0
	for _, p := range t.params {
		if p.Decay {
			for _, v := range p.Value {
				decay += float64(v) * float64(v)
			}
		}
	}
	mult := 0.0
	for k, nu := range info.Nu {
		mult += nu * (info.DirNorm[k]*info.DirNorm[k] - 1)
	}
	info.Loss = LossParts{Data: dataLoss, Decay: lambda * decay, Multiplier: mult}
	info.Loss.Total = info.Loss.Data + info.Loss.Decay + info.Loss.Multiplier
}

// fullMargins computes the margins of the whole training set into t.full,
// in chunks of the batch size.
func (t *Trainer[T]) fullMargins() {
	set := t.set
	t.full = Margins{}
	rho := t.baseRho()
	for start := 0; start < set.Rows; start += t.batch {
		rows := min(t.batch, set.Rows-start)
		x := set.X[start*set.Features : (start+rows)*set.Features]
		out := t.model.Forward(x, rows)
		summarize(&t.full, out, set.Y[start*set.Outputs:(start+rows)*set.Outputs], rows, set.Outputs, rho)
	}
}

// Steps returns the steps taken and the epochs completed so far.
func (t *Trainer[T]) Steps() (steps, epochs int) { return t.step, t.epoch }

// notFinite reports whether x is NaN or infinite: x − x is 0 for every
// finite x and NaN otherwise. It compiles to a subtraction and a compare,
// far cheaper per element than math.IsNaN and math.IsInf together on
// this hot path.
func notFinite[T net.Float](x T) bool { return x-x != 0 }

// firstNotFinite is the index of the first value of v that is not finite,
// or −1: where a vector loop reported one, the index to name.
func firstNotFinite[T net.Float](v []T) int {
	for j, x := range v {
		if notFinite(x) {
			return j
		}
	}
	return -1
}
