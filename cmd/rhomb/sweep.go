package main

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"github.com/rhomb/rhomb/optim/gauge/plot"
	"io"
	"os"
	"os/signal"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"syscall"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/internal/atomicfile"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/normalize"
	"github.com/rhomb/rhomb/optim"
	"github.com/rhomb/rhomb/optim/gauge"
	"github.com/rhomb/rhomb/optim/modelfile"
	"github.com/rhomb/rhomb/optim/recipe"
	"github.com/rhomb/rhomb/optim/sweep"
)

const sweepSummary = `Train one model for every combination of initial scale ρ0, weight decay λ,
learning rate η, temperature T and seed, and rank the runs by the
validation score of -metric (accuracy unless it names balanced, macro-f1
or auc; ties: the larger minimum normalized margin of the training rows,
then the smaller margin bound). -rho0, -decay, -lr, -temp and -seed take
comma-separated lists; every other train flag sets what all runs share.

The rows are split once (stratified, with -split-seed) and every run uses
the same split; the seeds of the grid vary initialization, batch order and
noise. Runs go -workers at a time. Every run's figures go to -o as JSON
Lines; the best run's model, kept in memory while the sweep goes on, is
saved to -model. A run that diverges is recorded as failed and ranked last.

On a cluster, -shard i/n trains only the points whose number is i modulo n;
-shard /n takes i from JOB_COMPLETION_INDEX (set by a Kubernetes Indexed
Job). Each shard writes its own -o and -model; rhomb sweep-merge combines
them (docs/sweeps.md). Interrupted, a sweep writes nothing: rerun it.

Choosing the best of many runs by a validation score flatters that
score: judge the chosen model on -test rows, which the sweep never
ranks by.`

const sweepExample = `  rhomb sweep -data readings.csv -label condition -missing impute -hidden 32,32 \
      -epochs 30 -rho0 0.01,0.1,1 -decay 1e-4,1e-3,1e-2 -seed 1,2 \
      -o sweep.jsonl -model best.model -heatmap sweep.svg
  rhomb sweep ... -shard /8 -o /results/shard-$JOB_COMPLETION_INDEX.jsonl    # one pod of eight`

// sweepOptions are the sweep flags beyond the training settings.
type sweepOptions struct {
	out, model, heatmap, shard string
	workers, top               int
	gamma                      float64
	splitSeed                  uint64
	quiet                      bool
}

// The grid's axes, as lists given to the train flags of the same names.
type sweepAxes struct {
	rho0, decay, lr, temp floatsFlag
	seeds                 uintsFlag
}

func runSweep(e *env, args []string) error {
	c := defaultConfig()
	fs := newFlags(e, "sweep", sweepSummary, sweepExample)
	c.bind(fs)
	ax := sweepAxes{rho0: floatsFlag{[]float64{c.Rho0}}, decay: floatsFlag{[]float64{c.Decay}}, lr: floatsFlag{[]float64{c.LR}}, temp: floatsFlag{[]float64{c.Temp}}, seeds: uintsFlag{[]uint64{c.Seed}}}
	// The swept train flags take lists here.
	for name, v := range map[string]flag.Value{"rho0": &ax.rho0, "decay": &ax.decay, "lr": &ax.lr, "temp": &ax.temp, "seed": &ax.seeds} {
		f := fs.Lookup(name)
		f.Value, f.DefValue = v, v.String()
		f.Usage += "; a comma-separated list of values to sweep"
	}
	var o sweepOptions
	fs.StringVar(&o.out, "o", "", "results `file` to write, JSON Lines, one line per run (required)")
	fs.StringVar(&o.model, "model", "", "model `file` for the best run (default: -o with its extension replaced by .model)")
	fs.StringVar(&o.heatmap, "heatmap", "", "draw the validation score over ρ0 × λ to this `file` (.png, .svg or .pdf)")
	fs.StringVar(&o.shard, "shard", "", "train only shard `i/n` of the grid; /n takes i from "+sweep.IndexEnv)
	fs.IntVar(&o.workers, "workers", 0, "`runs` to train at once (0: one per processor, GOMAXPROCS)")
	fs.IntVar(&o.top, "top", 10, "`rows` of the ranking to print (0: all)")
	fs.Float64Var(&o.gamma, "gamma", 0.1, "margin `γ` of the bound used as the last tie-breaker, fixed before training")
	fs.Uint64Var(&o.splitSeed, "split-seed", 0, "`seed` of the stratified split (default: the first -seed)")
	fs.BoolVar(&o.quiet, "quiet", false, "print no line per finished run")
	if err := parse(fs, args); err != nil {
		return err
	}
	splitSet := false
	fs.Visit(func(f *flag.Flag) { splitSet = splitSet || f.Name == "split-seed" })
	if !splitSet {
		o.splitSeed = ax.seeds.v[0]
	}
	bad := func(format string, args ...any) error { return usageError{fmt.Errorf(format, args...)} }
	switch {
	case c.Data == "" && c.Images == "":
		return bad("sweep: give -data FILE.csv (with -label) or -images and -labels")
	case o.out == "":
		return bad("sweep: -o names the results file to write")
	case !(c.Holdout > 0):
		return bad("sweep: -holdout %v: the sweep ranks by validation accuracy, so it needs validation rows", c.Holdout)
	case !(o.gamma > 0):
		return bad("sweep: -gamma %v: want a positive margin", o.gamma)
	case o.heatmap != "" && !plotFormat(o.heatmap):
		return bad("sweep: -heatmap %s: the extension chooses the format: .png, .svg or .pdf", o.heatmap)
	}
	if o.model == "" {
		o.model = strings.TrimSuffix(o.out, filepath.Ext(o.out)) + ".model"
	}
	if o.model == o.out {
		return bad("sweep: -model and -o are both %s", o.out)
	}
	c.Seed = o.splitSeed
	if err := c.check(); err != nil {
		return err
	}
	shard, err := sweep.ParseShard(o.shard)
	if err != nil {
		return usageError{err}
	}
	if c.Float == 32 {
		return sweepRun[float32](e, &c, &ax, &o, shard)
	}
	return sweepRun[float64](e, &c, &ax, &o, shard)
}

// plotFormat reports whether gonum/plot writes the file's extension.
func plotFormat(path string) bool {
	switch strings.ToLower(filepath.Ext(path)) {
	case ".png", ".svg", ".pdf":
		return true
	}
	return false
}

// sweepContext describes what every run depends on beyond the grid: the
// training record without the swept values and file names, the split
// seed, γ, and a hash of the data files' bytes (so shards that read
// different copies of a file under one name are caught, and copies under
// different names are not).
func sweepContext(c *config, gamma float64) (json.RawMessage, error) {
	h := sha256.New()
	for _, path := range []string{c.Data, c.Images, c.Labels} {
		if path == "" {
			continue
		}
		f, err := os.Open(path)
		if err != nil {
			return nil, dataError{err}
		}
		_, err = io.Copy(h, f)
		f.Close()
		if err != nil {
			return nil, dataError{err}
		}
	}
	rec := *c
	rec.Data, rec.Images, rec.Labels, rec.Run = "", "", "", nil
	rec.Rho0, rec.Decay, rec.LR, rec.Temp, rec.Seed = 0, 0, 0, 0, 0
	return json.Marshal(struct {
		Config    json.RawMessage `json:"config"`
		SplitSeed uint64          `json:"split_seed"`
		Gamma     float64         `json:"gamma"`
		Data      string          `json:"data_sha256"`
	}{rec.record(), c.Seed, gamma, hex.EncodeToString(h.Sum(nil))})
}

// kept is the best run so far and its model.
type kept[T net.Float] struct {
	mu     sync.Mutex
	result *sweep.Result
	model  *modelfile.Model[T]
}

func (k *kept[T]) offer(r sweep.Result, m *modelfile.Model[T]) {
	k.mu.Lock()
	defer k.mu.Unlock()
	if k.result == nil || sweep.Compare(r, *k.result) < 0 {
		k.result, k.model = &r, m
	}
}

func sweepRun[T net.Float](e *env, c *config, ax *sweepAxes, o *sweepOptions, shard sweep.ShardID) error {
	ctxJSON, err := sweepContext(c, o.gamma)
	if err != nil {
		return err
	}
	base, err := c.baseSettings()
	if err != nil {
		return err
	}
	lrs := ax.lr.v
	if len(lrs) == 1 && lrs[0] == 0 {
		lrs = nil // the measured step size of the training procedure
	}
	gr := &sweep.Grid{Rho0: ax.rho0.v, WeightDecay: ax.decay.v, LearningRate: lrs, Temperature: ax.temp.v, Seeds: ax.seeds.v,
		Base: base, Context: ctxJSON}
	if err := gr.Validate(); err != nil {
		return usageError{err}
	}
	fingerprint, err := gr.Fingerprint()
	if err != nil {
		return err
	}
	p, err := prepare[T](c, e.stdin)
	if err != nil {
		return err
	}
	var weights []float64
	if c.Balance {
		weights = data.ClassWeights(p.train.Labels(), max(p.train.Outputs, 2))
	}
	total := len(gr.Points())
	points := gr.Shard(shard.Index, shard.Count)
	// Build the first point's network, model and loss before starting, so
	// that a bad -act, -norm or -loss is a usage error, not a failed run.
	if len(points) > 0 {
		if _, _, _, err := sweepModel[T](c, p, weights, points[0]); err != nil {
			return err
		}
	}

	var best kept[T]
	var printMu sync.Mutex
	finished := 0
	trainOne := func(ctx context.Context, pt sweep.Point) (sweep.Result, error) {
		r, m, err := sweepPoint(ctx, c, p, weights, gr, pt, o.gamma)
		if err == nil {
			m.Metrics = map[string]any{"validation_accuracy": r.ValAccuracy, "validation_score": r.ValScore, "ranked_by": r.Metric, "train_accuracy": r.TrainAccuracy, "rho": r.Rho,
				"margin_min": r.MarginMin, "margin_mean": r.MarginMean, "bound": r.Bound, "sweep_point": pt.Index,
				"sweep_points": total, "sweep_fingerprint": fingerprint, "split_seed": c.Seed}
			best.offer(r, m)
		}
		if !o.quiet && ctx.Err() == nil {
			printMu.Lock()
			finished++
			if err != nil {
				fmt.Fprintf(e.stderr, "[%d/%d] %s: failed: %v\n", finished, len(points), pt, err)
			} else {
				fmt.Fprintf(e.stderr, "[%d/%d] %s: validation %s %.4f, min margin %.4g, ρ %.4g\n", finished, len(points), pt, r.Metric, r.ValScore, r.MarginMin, r.Rho)
			}
			printMu.Unlock()
		}
		return r, err
	}
	w := e.stdout
	fmt.Fprintf(w, "sweep: %d of %d points (shard %s), %d rows for training, %d for validation\n", len(points), total, shard, p.train.Rows, p.val.Rows)
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	results, err := sweep.Run(ctx, points, trainOne, o.workers)
	if err != nil {
		if ctx.Err() != nil {
			return fmt.Errorf("%w after %d of %d runs; no results were written (a results file holds a whole shard): run the sweep again", errInterrupted, len(results), len(points))
		}
		return err
	}
	res, err := sweep.NewResults(gr, shard, results)
	if err != nil {
		return err
	}
	ranked := sweep.Rank(results)
	if best.model != nil {
		if p.test != nil {
			best.model.Metrics["test_accuracy"] = accuracy(best.model.Trainable(), p.test)
		}
		if err := modelfile.Save(o.model, best.model); err != nil {
			return err
		}
		res.Model, res.ModelIndex = relativeTo(o.out, o.model), best.result.Index
	}
	if err := res.Save(o.out); err != nil {
		return err
	}
	if err := sweepReport(e, ranked, res.Axes, o.top, o.heatmap); err != nil {
		return err
	}
	if shard.Count > 1 {
		fmt.Fprintf(w, "(this ranking covers shard %s only; combine the shards with rhomb sweep-merge)\n", shard)
	}
	fmt.Fprintf(w, "results: %s\n", o.out)
	if best.model == nil {
		if len(points) == 0 {
			fmt.Fprintf(w, "shard %s of a %d-point grid has no points; the results file says so for the merge\n", shard, total)
			return nil
		}
		return fmt.Errorf("sweep: all %d runs failed; the first: %s", len(results), ranked[0].Err)
	}
	b := best.result
	fmt.Fprintf(w, "best: %s: validation %s %.4f", b.Point, b.Metric, b.ValScore)
	if t, ok := best.model.Metrics["test_accuracy"].(float64); ok {
		fmt.Fprintf(w, ", test accuracy %.4f on %d rows", t, p.test.Rows)
	}
	fmt.Fprintf(w, "; saved %s\n", o.model)
	return nil
}

// sweepReport prints the ranking's table and draws the heat map.
func sweepReport(e *env, ranked []sweep.Result, axes sweep.Axes, top int, heatmap string) error {
	fmt.Fprintln(e.stdout)
	if err := sweep.WriteTable(e.stdout, ranked, top); err != nil {
		return err
	}
	fmt.Fprintln(e.stdout)
	if heatmap != "" {
		if err := plot.SaveHeatMap(heatmap, axes, ranked, plot.HeatMapOptions{}); err != nil {
			return err
		}
		fmt.Fprintf(e.stdout, "heat map: %s\n", heatmap)
	}
	return nil
}

// relativeTo names target relative to the directory of from when it can
// (results and models then move together), else as given.
func relativeTo(from, target string) string {
	fa, err1 := filepath.Abs(filepath.Dir(from))
	ta, err2 := filepath.Abs(target)
	if err1 != nil || err2 != nil {
		return target
	}
	if rel, err := filepath.Rel(fa, ta); err == nil && !strings.HasPrefix(rel, "..") {
		return rel
	}
	return ta
}

// sweepModel builds point pt's network, its normalized wrapper (nil for
// -norm none) and its loss, exactly as train would with the point's values.
func sweepModel[T net.Float](c *config, p *prepared[T], weights []float64, pt sweep.Point) (*net.Network[T], *normalize.Net[T], config, error) {
	cp := *c
	cp.Rho0, cp.Decay, cp.LR, cp.Temp, cp.Seed = pt.Rho0, pt.WeightDecay, pt.LearningRate, pt.Temperature, pt.Seed
	n, err := buildNetwork[T](&cp, p.train.Features, p.train.Outputs)
	if err != nil {
		return nil, nil, cp, err
	}
	no, err := cp.normOptions()
	if err != nil {
		return nil, nil, cp, err
	}
	var wrapped *normalize.Net[T]
	if no != nil {
		if wrapped, err = normalize.Wrap(n, *no); err != nil {
			return nil, nil, cp, usageError{fmt.Errorf("sweep: %w", err)}
		}
	}
	if _, err := makeLoss[T](&cp, p.train.Outputs, weights); err != nil {
		return nil, nil, cp, err
	}
	return n, wrapped, cp, nil
}

// sweepPoint trains and measures one point; the model it returns is the
// trained one, ready to save.
func sweepPoint[T net.Float](ctx context.Context, c *config, p *prepared[T], weights []float64, gr *sweep.Grid, pt sweep.Point, gamma float64) (sweep.Result, *modelfile.Model[T], error) {
	r := sweep.NaNResult(pt)
	n, wrapped, cp, err := sweepModel[T](c, p, weights, pt)
	if err != nil {
		return r, nil, err
	}
	lf, err := makeLoss[T](&cp, p.train.Outputs, weights)
	if err != nil {
		return r, nil, err
	}
	var model optim.Model[T] = n
	if wrapped != nil {
		model = wrapped
	}
	plan, err := cp.plan()
	if err != nil {
		return r, nil, err
	}
	sess, err := recipe.NewSession(model, lf, p.train, p.val, plan, nil)
	if err != nil {
		return r, nil, err
	}
	out, err := sess.Run(ctx)
	res := out.Result
	sweep.FromRun(&r, res)
	if err != nil {
		return r, nil, err
	}
	m, err := sweep.Measure[T](model, p.train, p.val, gauge.BoundOptions{Gamma: gamma})
	if err != nil {
		return r, nil, err
	}
	m.Point = pt
	m.ValScore, m.Metric = recipe.Evaluate(model, p.val).Value(plan.Metric), plan.Metric.String()
	sweep.FromRun(&m, res)
	return m, &modelfile.Model[T]{Network: n, Normalized: wrapped, Pipeline: p.pipeline, Classes: p.classes,
		Label: c.Label, Loss: lf.Name(), Training: cp.record()}, nil
}

const sweepMergeSummary = `Combine the results files of a sweep's shards into one ranking: check that
they come from one grid (same fingerprint) and that every point has
exactly one result, print the ranking, and optionally write it as one
results file, copy the best run's model out of the shard that trained it,
and draw the heat map. Nothing is retrained.`

const sweepMergeExample = `  rhomb sweep-merge -in 'results/shard-*.jsonl' -o results/all.jsonl -model best.model -heatmap sweep.png`

func runSweepMerge(e *env, args []string) error {
	fs := newFlags(e, "sweep-merge", sweepMergeSummary, sweepMergeExample)
	var in listFlag
	fs.Var(&in, "in", "comma-separated results `files` or patterns (results/shard-*.jsonl; quote them from a shell) (required)")
	out := fs.String("o", "", "write the merged ranking as one results `file`")
	model := fs.String("model", "", "copy the best run's model to this `file`")
	heatmap := fs.String("heatmap", "", "draw the validation score over ρ0 × λ to this `file` (.png, .svg or .pdf)")
	top := fs.Int("top", 10, "`rows` of the ranking to print (0: all)")
	if err := parse(fs, args); err != nil {
		return err
	}
	switch {
	case len(in) == 0:
		return usageError{errors.New("sweep-merge: -in names the shards' results files")}
	case *heatmap != "" && !plotFormat(*heatmap):
		return usageError{fmt.Errorf("sweep-merge: -heatmap %s: the extension chooses the format: .png, .svg or .pdf", *heatmap)}
	}
	var paths []string
	for _, pat := range in {
		if !strings.ContainsAny(pat, "*?[") {
			paths = append(paths, pat)
			continue
		}
		m, err := filepath.Glob(pat)
		if err != nil {
			return usageError{fmt.Errorf("sweep-merge: -in %s: %w", pat, err)}
		}
		if len(m) == 0 {
			return dataError{fmt.Errorf("sweep-merge: -in %s matches no file", pat)}
		}
		paths = append(paths, m...)
	}
	merged, err := sweep.Merge(paths...)
	if err != nil {
		return dataError{err}
	}
	w := e.stdout
	fmt.Fprintf(w, "merged %d files: %d points, grid %s\n", len(paths), len(merged.Results), merged.Fingerprint[:12])
	all := merged.All()
	best, part, src := merged.Best()
	if *model != "" {
		if best.Failed() {
			return fmt.Errorf("sweep-merge: every run failed; there is no model to copy")
		}
		from, err := bestModelPath(part, src, best, merged.Fingerprint)
		if err != nil {
			return err
		}
		b, err := os.ReadFile(from)
		if err != nil {
			return modelError{err}
		}
		if err := atomicfile.WriteFile(*model, b); err != nil {
			return err
		}
		all.Model, all.ModelIndex = relativeTo(*out, *model), best.Index
		if *out == "" {
			all.Model = *model
		}
	}
	if *out != "" {
		if err := all.Save(*out); err != nil {
			return err
		}
	}
	if err := sweepReport(e, merged.Ranked, merged.Axes, *top, *heatmap); err != nil {
		return err
	}
	if *out != "" {
		fmt.Fprintf(w, "results: %s\n", *out)
	}
	fmt.Fprintf(w, "best: %s: validation %s %.4f", best.Point, best.Metric, best.ValScore)
	if *model != "" {
		fmt.Fprintf(w, "; model copied from %s to %s", src, *model)
	}
	fmt.Fprintln(w)
	return nil
}

// bestModelPath finds the model the shard part (read from src) saved for
// its best run, and checks that it is the model of point best of this
// grid before it is copied.
func bestModelPath(part *sweep.Results, src string, best sweep.Result, fingerprint string) (string, error) {
	if part.Model == "" {
		return "", dataError{fmt.Errorf("sweep-merge: %s names no model file, so the best run's model (point %d) cannot be copied", src, best.Index)}
	}
	if part.ModelIndex != best.Index {
		return "", dataError{fmt.Errorf("sweep-merge: %s says its model is of point %d, but its best run is point %d", src, part.ModelIndex, best.Index)}
	}
	path := part.Model
	if !filepath.IsAbs(path) {
		path = filepath.Join(filepath.Dir(src), path)
	}
	var point float64
	var fp string
	err := withModel(path,
		func(m *modelfile.Model[float32]) error { point, fp = metricOf(m.Metrics); return nil },
		func(m *modelfile.Model[float64]) error { point, fp = metricOf(m.Metrics); return nil })
	if err != nil {
		return "", err
	}
	if fp != fingerprint || point != float64(best.Index) {
		return "", modelError{fmt.Errorf("%s is not the model of point %d of this sweep (it records point %v of grid %.12s)", path, best.Index, point, fp)}
	}
	return path, nil
}

func metricOf(m map[string]any) (point float64, fingerprint string) {
	point, _ = m["sweep_point"].(float64)
	fingerprint, _ = m["sweep_fingerprint"].(string)
	return point, fingerprint
}

// floatsFlag is a comma-separated list of numbers.
type floatsFlag struct{ v []float64 }

func (l *floatsFlag) String() string {
	if l == nil {
		return ""
	}
	s := make([]string, len(l.v))
	for i, x := range l.v {
		s[i] = strconv.FormatFloat(x, 'g', -1, 64)
	}
	return strings.Join(s, ",")
}

func (l *floatsFlag) Set(s string) error {
	l.v = nil
	for _, f := range strings.Split(s, ",") {
		x, err := strconv.ParseFloat(strings.TrimSpace(f), 64)
		if err != nil {
			return fmt.Errorf("%q is not a number", f)
		}
		l.v = append(l.v, x)
	}
	return nil
}

// uintsFlag is a comma-separated list of seeds.
type uintsFlag struct{ v []uint64 }

func (l *uintsFlag) String() string {
	if l == nil {
		return ""
	}
	s := make([]string, len(l.v))
	for i, x := range l.v {
		s[i] = strconv.FormatUint(x, 10)
	}
	return strings.Join(s, ",")
}

func (l *uintsFlag) Set(s string) error {
	l.v = nil
	for _, f := range strings.Split(s, ",") {
		x, err := strconv.ParseUint(strings.TrimSpace(f), 10, 64)
		if err != nil {
			return fmt.Errorf("%q is not a whole number ≥ 0", f)
		}
		l.v = append(l.v, x)
	}
	return nil
}
