package sweep

import (
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"strconv"
	"strings"

	"github.com/rhomb/rhomb/optim"
)

// Grid is a sweep: the values to try along each axis, and the settings
// every point shares. The points are the Cartesian product of the axes
// (see Points for their order).
//
// An empty axis stands for one value taken from Base: Base.WeightDecay,
// Base.LearningRate, Base.Temperature or Base.Seed; for Rho0 it is 0,
// which net.InitSettings reads as "keep the initialization scheme's own
// scale". So the zero Grid has exactly one point, the Base settings.
type Grid struct {
	// Rho0 are initial scales ρ0 = ∏‖W_k‖_F (net.InitSettings.Rho0).
	Rho0 []float64
	// WeightDecay are values of λ (optim.Settings.WeightDecay).
	WeightDecay []float64
	// LearningRate are base learning rates η (optim.Settings.LearningRate).
	LearningRate []float64
	// Temperature are Langevin temperatures T (optim.Settings.Temperature).
	Temperature []float64
	// Seeds select initialization and training randomness
	// (optim.Settings.Seed, and whatever else the training function seeds
	// with Point.Seed). Repeating a setting over seeds measures the spread
	// that randomness alone causes.
	Seeds []uint64
	// Base holds the settings every point shares. A point's learning rate,
	// weight decay, temperature and seed replace Base's (see Settings);
	// Base.Hooks is not part of the grid and is copied as it is.
	Base optim.Settings
	// Context describes, as any JSON value, everything else the runs
	// depend on — the data, the network, the loss. It is part of the
	// fingerprint, so that results of different sweeps cannot be merged
	// by mistake. Nil means none.
	Context json.RawMessage
}

// Axes are a grid's values along each axis, every axis holding at least
// one value (Grid.Axes fills empty ones from the base settings). Results
// files store the axes, so that a merge can rebuild the points without
// the settings.
type Axes struct {
	Rho0         []float64 `json:"rho0"`
	WeightDecay  []float64 `json:"weight_decay"`
	LearningRate []float64 `json:"learning_rate"`
	Temperature  []float64 `json:"temperature"`
	Seeds        []uint64  `json:"seeds"`
}

// Point is one combination of the axes' values. Index is its position in
// Axes.Points, from 0; results carry it so that shards can be merged.
type Point struct {
	Index        int     `json:"index"`
	Rho0         float64 `json:"rho0"`
	WeightDecay  float64 `json:"weight_decay"`
	LearningRate float64 `json:"learning_rate"`
	Temperature  float64 `json:"temperature"`
	Seed         uint64  `json:"seed"`
}

// String shows the point's values, for progress lines and errors.
func (p Point) String() string {
	return fmt.Sprintf("#%d ρ0=%s λ=%s η=%s T=%s seed=%d", p.Index, g(p.Rho0), g(p.WeightDecay), g(p.LearningRate), g(p.Temperature), p.Seed)
}

func g(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

// Axes returns the grid's axes with every empty one replaced by its single
// base value.
func (gr *Grid) Axes() Axes {
	one := func(v []float64, base float64) []float64 {
		if len(v) == 0 {
			return []float64{base}
		}
		return append([]float64(nil), v...)
	}
	a := Axes{
		Rho0:         one(gr.Rho0, 0),
		WeightDecay:  one(gr.WeightDecay, gr.Base.WeightDecay),
		LearningRate: one(gr.LearningRate, gr.Base.LearningRate),
		Temperature:  one(gr.Temperature, gr.Base.Temperature),
		Seeds:        append([]uint64(nil), gr.Seeds...),
	}
	if len(a.Seeds) == 0 {
		a.Seeds = []uint64{gr.Base.Seed}
	}
	return a
}

// Size is the number of points: the product of the axes' lengths.
func (a Axes) Size() int {
	return len(a.Rho0) * len(a.WeightDecay) * len(a.LearningRate) * len(a.Temperature) * len(a.Seeds)
}

// Points enumerates the grid in a fixed order: lexicographic in (ρ0, λ, η,
// T, seed) by the positions of the values on their axes (not by the
// values), with ρ0 varying slowest and the seed fastest, so the repeats
// of one setting over seeds are adjacent. Point k has
//
//	k = (((i_ρ0·n_λ + i_λ)·n_η + i_η)·n_T + i_T)·n_seed + i_seed.
//
// The order depends on nothing but the axes, so every process of a
// sharded sweep computes the same points.
func (gr *Grid) Points() []Point { return gr.Axes().Points() }

// Points enumerates the axes' points; see Grid.Points.
func (a Axes) Points() []Point {
	pts := make([]Point, 0, a.Size())
	for _, r := range a.Rho0 {
		for _, wd := range a.WeightDecay {
			for _, lr := range a.LearningRate {
				for _, t := range a.Temperature {
					for _, s := range a.Seeds {
						pts = append(pts, Point{Index: len(pts), Rho0: r, WeightDecay: wd, LearningRate: lr, Temperature: t, Seed: s})
					}
				}
			}
		}
	}
	return pts
}

// Shard returns shard i of n: the points whose Index is i modulo n, in
// order (round-robin). Round-robin, rather than contiguous blocks, spreads
// every axis over all shards, so that no shard gets all the slow points
// (the largest learning rates or scales, say) and the shards finish at
// about the same time. The n shards partition the grid: every point is in
// exactly one. A shard is empty when i ≥ the number of points. Shard
// panics unless 0 ≤ i < n.
func (gr *Grid) Shard(i, n int) []Point { return gr.Axes().Shard(i, n) }

// Shard returns shard i of n of the axes' points; see Grid.Shard.
func (a Axes) Shard(i, n int) []Point {
	if n < 1 || i < 0 || i >= n {
		panic(fmt.Sprintf("sweep: shard %d of %d; want 0 ≤ i < n", i, n))
	}
	all := a.Points()
	var pts []Point
	for k := i; k < len(all); k += n {
		pts = append(pts, all[k])
	}
	return pts
}

// Settings returns the training settings of point p: Base with p's
// learning rate, weight decay, temperature and seed.
func (gr *Grid) Settings(p Point) optim.Settings {
	s := gr.Base
	s.LearningRate, s.WeightDecay, s.Temperature, s.Seed = p.LearningRate, p.WeightDecay, p.Temperature, p.Seed
	return s
}

// Validate checks the axes: every value finite, ρ0, λ and T not negative,
// learning rates positive (zero, optim's "default", is accepted only as
// the base value of an empty axis), and no value repeated on an axis (a
// repeat would train the same point twice and make the summaries
// ambiguous). Context, if set, must be valid JSON.
func (gr *Grid) Validate() error {
	check := func(name string, v []float64, ok func(float64) bool, want string) error {
		seen := map[float64]bool{}
		for i, x := range v {
			if math.IsNaN(x) || math.IsInf(x, 0) || !ok(x) {
				return fmt.Errorf("sweep: Grid.%s[%d] = %v; want %s", name, i, x, want)
			}
			if seen[x] {
				return fmt.Errorf("sweep: Grid.%s[%d] = %v repeats an earlier value", name, i, x)
			}
			seen[x] = true
		}
		return nil
	}
	nonNeg := func(x float64) bool { return x >= 0 }
	if err := check("Rho0", gr.Rho0, nonNeg, "ρ0 ≥ 0 (0 keeps the scheme's scale)"); err != nil {
		return err
	}
	if err := check("WeightDecay", gr.WeightDecay, nonNeg, "λ ≥ 0"); err != nil {
		return err
	}
	if err := check("LearningRate", gr.LearningRate, func(x float64) bool { return x > 0 }, "a positive learning rate"); err != nil {
		return err
	}
	if err := check("Temperature", gr.Temperature, nonNeg, "T ≥ 0"); err != nil {
		return err
	}
	seen := map[uint64]bool{}
	for i, s := range gr.Seeds {
		if seen[s] {
			return fmt.Errorf("sweep: Grid.Seeds[%d] = %d repeats an earlier seed", i, s)
		}
		seen[s] = true
	}
	if gr.Context != nil && !json.Valid(gr.Context) {
		return fmt.Errorf("sweep: Grid.Context is not valid JSON")
	}
	return nil
}

// description is what a fingerprint hashes and a results file stores: the
// effective axes, the shared settings that are not on an axis, and the
// context.
type description struct {
	Axes    Axes            `json:"axes"`
	Base    baseDescription `json:"base"`
	Context json.RawMessage `json:"context,omitempty"`
}

// baseDescription is the part of optim.Settings that a point does not
// replace. The schedule is named by its Go type and its fields.
type baseDescription struct {
	BatchSize  int             `json:"batch_size"`
	Sampling   string          `json:"sampling"`
	Momentum   float64         `json:"momentum"`
	Nesterov   bool            `json:"nesterov"`
	Epochs     int             `json:"epochs"`
	TargetLoss float64         `json:"target_loss"`
	Schedule   string          `json:"schedule"`
	Params     json.RawMessage `json:"schedule_params,omitempty"`
}

func (gr *Grid) describe() (description, error) {
	s := gr.Base
	b := baseDescription{BatchSize: s.BatchSize, Sampling: s.Sampling.String(), Momentum: s.Momentum,
		Nesterov: s.Nesterov, Epochs: s.Epochs, TargetLoss: s.TargetLoss, Schedule: fmt.Sprintf("%T", optim.Constant{})}
	if s.Schedule != nil {
		b.Schedule = fmt.Sprintf("%T", s.Schedule)
		p, err := json.Marshal(s.Schedule)
		if err != nil {
			return description{}, fmt.Errorf("sweep: the schedule %s cannot be described for the fingerprint: %w", b.Schedule, err)
		}
		if string(p) != "{}" {
			b.Params = p
		}
	}
	var ctx json.RawMessage
	if gr.Context != nil {
		ctx = append(json.RawMessage(nil), gr.Context...)
	}
	return description{Axes: gr.Axes(), Base: b, Context: ctx}, nil
}

// fingerprintOf hashes a description: the SHA-256 of its JSON encoding
// (compact; Go writes floats in the shortest form that reads back to the
// same value, so a description read from a file hashes to the same
// value), in hexadecimal.
func fingerprintOf(d description) (string, error) {
	b, err := json.Marshal(d)
	if err != nil {
		return "", err
	}
	sum := sha256.Sum256(append([]byte("rhomb sweep grid v1\n"), b...))
	return hex.EncodeToString(sum[:]), nil
}

// Fingerprint identifies the grid: a SHA-256 over its axes (as Axes
// returns them, in order), the shared settings that are not on an axis
// (batch size, sampling, momentum, epochs, target loss, schedule) and the
// context. Two processes agree on it exactly when they would enumerate the
// same points and train them the same way, as far as the grid can tell;
// Merge refuses results whose fingerprints differ.
func (gr *Grid) Fingerprint() (string, error) {
	d, err := gr.describe()
	if err != nil {
		return "", err
	}
	return fingerprintOf(d)
}

// IndexEnv is the environment variable that a Kubernetes Indexed Job sets
// in each of its pods to the pod's completion index, 0 to completions−1.
const IndexEnv = "JOB_COMPLETION_INDEX"

// ShardID names shard Index of Count.
type ShardID struct{ Index, Count int }

// All is the whole grid as one shard.
var All = ShardID{0, 1}

func (s ShardID) String() string { return fmt.Sprintf("%d/%d", s.Index, s.Count) }

// ParseShard reads a shard given as "i/n" or "/n", taking the index from
// the environment variable JOB_COMPLETION_INDEX (IndexEnv) where asked:
//
//   - "i/n": shard i of n, 0 ≤ i < n. If JOB_COMPLETION_INDEX is also set
//     it must equal i: a disagreement means the job is misconfigured, and
//     running the wrong shard would train some points twice and others
//     never.
//   - "/n": the index is JOB_COMPLETION_INDEX, which must be set.
//   - "" (no shard asked for): the whole grid, All. If
//     JOB_COMPLETION_INDEX is set this is an error, since n is unknown and
//     every pod would train the whole grid.
//
// A variable set to the empty string counts as not set. The index must be
// a decimal integer in [0, n).
func ParseShard(spec string) (ShardID, error) {
	env, haveEnv := os.LookupEnv(IndexEnv)
	env = strings.TrimSpace(env)
	haveEnv = haveEnv && env != ""
	spec = strings.TrimSpace(spec)
	if spec == "" {
		if haveEnv {
			return ShardID{}, fmt.Errorf("sweep: %s=%s is set but no shard count was given; give the shard as /n (n the job's completions)", IndexEnv, env)
		}
		return All, nil
	}
	is, ns, ok := strings.Cut(spec, "/")
	if !ok {
		return ShardID{}, fmt.Errorf("sweep: shard %q: want i/n, or /n with the index in %s", spec, IndexEnv)
	}
	n, err := strconv.Atoi(ns)
	if err != nil || n < 1 {
		return ShardID{}, fmt.Errorf("sweep: shard %q: the count %q is not a whole number ≥ 1", spec, ns)
	}
	index := func(s, where string) (int, error) {
		i, err := strconv.Atoi(s)
		if err != nil || i < 0 || i >= n {
			return 0, fmt.Errorf("sweep: shard %q: the index %q (%s) is not a whole number from 0 to %d", spec, s, where, n-1)
		}
		return i, nil
	}
	if is == "" {
		if !haveEnv {
			return ShardID{}, fmt.Errorf("sweep: shard %q takes its index from %s, which is not set", spec, IndexEnv)
		}
		i, err := index(env, IndexEnv)
		return ShardID{i, n}, err
	}
	i, err := index(is, "before the /")
	if err != nil {
		return ShardID{}, err
	}
	if haveEnv {
		if e, err := strconv.Atoi(env); err != nil || e != i {
			return ShardID{}, fmt.Errorf("sweep: shard %q disagrees with %s=%s", spec, IndexEnv, env)
		}
	}
	return ShardID{i, n}, nil
}
